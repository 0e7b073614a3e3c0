"""The app factory: builds the runtime in the lifespan and wires routes, middleware and errors."""

from __future__ import annotations

from collections.abc import AsyncIterator
from contextlib import asynccontextmanager

from fastapi import FastAPI

from service import __version__
from service.api.middleware import BodyLimitMiddleware, RequestIdMiddleware
from service.api.problems import install_problem_handlers
from service.api.routes import forecasts, health, models
from service.config import Settings
from service.runtime.pool import WorkPool

DESCRIPTION = (
    "Windvane takes a time series as JSON and returns diagnostics (is it stationary, "
    "seasonal, a random walk?), the fitted model's metadata, and forecasts with prediction "
    "intervals. Errors are RFC 9457 problem documents naming the offending field."
)


def create_app(settings: Settings | None = None) -> FastAPI:
    """A new app with its own settings, pool and routes; nothing is built at import time."""
    settings = settings or Settings()

    @asynccontextmanager
    async def lifespan(app: FastAPI) -> AsyncIterator[None]:
        pool = WorkPool(settings.pool_workers, settings.queue_size, settings.fit_seconds)
        app.state.pool = pool
        try:
            yield
        finally:
            pool.close()

    app = FastAPI(title="Windvane", version=__version__, description=DESCRIPTION,
                  lifespan=lifespan, docs_url="/docs", redoc_url=None)
    app.state.settings = settings
    install_problem_handlers(app)
    app.include_router(health.router)
    app.include_router(models.router)
    app.include_router(forecasts.router)
    app.add_middleware(BodyLimitMiddleware, max_bytes=settings.max_body_bytes)
    app.add_middleware(RequestIdMiddleware)
    return app
