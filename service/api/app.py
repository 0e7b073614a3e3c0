"""The app factory: builds the runtime in the lifespan and wires routes, middleware and errors."""

from __future__ import annotations

import asyncio
import gc
import logging
from collections.abc import AsyncIterator
from contextlib import asynccontextmanager

from fastapi import FastAPI

from service import __version__
from service.api.auth import install_api_keys
from service.api.caching import cache_from
from service.api.docs import install_docs
from service.api.document import install_document
from service.api.hits import ResponseHitMiddleware
from service.api.middleware import (
    AdmissionMiddleware,
    BodyLimitMiddleware,
    CancelledAnswerMiddleware,
    HeaderLimitMiddleware,
    RequestIdMiddleware,
    RootPathMiddleware,
)
from service.api.observe import ObserveMiddleware
from service.api.problems import install_problem_handlers
from service.api.representations import RepresentationMiddleware
from service.api.routes import backtests, batches, diagnostics, forecasts, health, models
from service.config import Settings
from service.runtime.logs import request_logger
from service.runtime.pool import PoolStats, WorkPool
from service.runtime.preload import WARM_MODULES
from service.runtime.telemetry import Telemetry

log = logging.getLogger("windvane")

DESCRIPTION = (
    "Windvane takes a time series as JSON and returns diagnostics (is it stationary, "
    "seasonal, a random walk?), the fitted model's metadata, and forecasts with prediction "
    "intervals. Errors are RFC 9457 problem documents naming the offending field."
)


def description(settings: Settings) -> str:
    """The OpenAPI description, with the limits this instance enforces."""
    return (
        f"{DESCRIPTION}\n\n"
        "Limits (from the settings; over a limit is a 413 or 422 problem, a full queue or "
        "an exceeded time budget a 503 with Retry-After):\n\n"
        f"- points per series: {settings.max_points} (`WINDVANE_MAX_POINTS`)\n"
        f"- forecast horizon: {settings.max_horizon} (`WINDVANE_MAX_HORIZON`)\n"
        f"- request body: {settings.max_body_bytes} bytes (`WINDVANE_MAX_BODY_BYTES`)\n"
        f"- request line and headers: {settings.max_header_bytes} bytes "
        "(`WINDVANE_MAX_HEADER_BYTES`)\n"
        f"- requests per batch: {settings.max_batch_series} (`WINDVANE_MAX_BATCH_SERIES`), "
        f"batch body: {settings.max_batch_body_bytes} bytes (`WINDVANE_MAX_BATCH_BODY_BYTES`), "
        f"batch time: {settings.batch_seconds:g} s (`WINDVANE_BATCH_SECONDS`)\n"
        f"- CPU time per request: {settings.fit_seconds:g} s (`WINDVANE_FIT_SECONDS`)\n"
        f"- requests waiting for a worker: {settings.queue_size} (`WINDVANE_QUEUE_SIZE`)"
    )


def _report_failed_start(task: asyncio.Task[int]) -> None:
    if not task.cancelled() and task.exception() is not None:
        log.error("the worker pool failed to start", exc_info=task.exception())


def create_app(settings: Settings | None = None) -> FastAPI:
    """A new app with its own settings, pool and routes; nothing is built at import time."""
    settings = settings or Settings()
    telemetry = Telemetry(library_versions=settings.library_versions)

    @asynccontextmanager
    async def lifespan(app: FastAPI) -> AsyncIterator[None]:
        app.state.cache = cache_from(settings)
        app.state.flights = {}

        def occupancy(stats: PoolStats) -> None:
            telemetry.record_pool(stats.workers, stats.busy, stats.queued)

        pool = WorkPool(
            settings.pool_workers,
            settings.queue_size,
            settings.fit_seconds,
            preload=WARM_MODULES,
            max_jobs_per_worker=settings.pool_max_jobs,
            on_change=occupancy,
            on_recycle=telemetry.record_recycle,
            start=False,
        )
        app.state.pool = pool
        # The server listens at once: /healthz answers while the workers start and warm up,
        # /readyz says 503 until they are ready, and work requests wait for a worker.
        starting = asyncio.create_task(pool.start())
        starting.add_done_callback(_report_failed_start)
        # Everything built so far lives as long as the process: out of the collector's way,
        # a full collection no longer walks the libraries' objects in the middle of a request.
        gc.freeze()
        try:
            yield
        finally:
            starting.cancel()
            pool.close()
            telemetry.close()

    app = FastAPI(
        title="Windvane",
        version=__version__,
        description=description(settings),
        lifespan=lifespan,
        docs_url=None,  # served by install_docs, with assets from the installed package
        redoc_url=None,
        # Operation ids in plain words: the handler's name (create_forecast).
        generate_unique_id_function=lambda route: route.name,
        # Response parts that leave out what the answer lacks (Sparse) keep their field list.
        separate_input_output_schemas=False,
    )
    app.state.settings = settings
    app.state.telemetry = telemetry
    install_problem_handlers(app)
    install_docs(app)
    app.include_router(health.router)
    app.include_router(models.router)
    app.include_router(forecasts.router)
    app.include_router(batches.router)
    app.include_router(diagnostics.router)
    app.include_router(backtests.router)
    install_document(app, settings, amend=batches.document)
    # Innermost, behind the key check: a cache hit needs an accepted key as well.
    app.add_middleware(ResponseHitMiddleware)
    # Outside the hit: CSV bodies become JSON first, tables and charts are made from JSON.
    app.add_middleware(RepresentationMiddleware)
    app.state.key_ring = install_api_keys(app, settings)  # request ids reach its 401 problems
    app.add_middleware(
        BodyLimitMiddleware,
        max_bytes=settings.max_body_bytes,
        by_path={"/v1/forecast-batches": settings.max_batch_body_bytes},
    )
    app.add_middleware(AdmissionMiddleware)  # outside the body limit: refuses before reading
    app.add_middleware(HeaderLimitMiddleware, max_bytes=settings.max_header_bytes)
    app.add_middleware(CancelledAnswerMiddleware)
    app.add_middleware(ObserveMiddleware, telemetry=telemetry, logger=request_logger())
    app.add_middleware(RequestIdMiddleware)
    if settings.root_path.rstrip("/"):
        app.add_middleware(RootPathMiddleware, root_path=settings.root_path)
    return app
