"""What `windvane serve` runs: a listening port within a second, the application behind it.

Importing the application (FastAPI, pandas, scipy, statsmodels and the model registry) takes
seconds of CPU, and uvicorn opens its port only once the app's start-up has run, so an
orchestrator's liveness probe could fail during it. This ASGI app imports nothing heavy: its
start-up launches the pool's fork server (which imports and warms up the statistics in its
own process) and, in a thread, imports and builds the real app, then enters the real app's
lifespan. Until then it answers /healthz 200 and /readyz 503 itself, and holds any other
request until the app is there. Both imports run side by side on two cores.
"""

from __future__ import annotations

import asyncio
import contextlib
import json
import logging
import os
from contextlib import AbstractAsyncContextManager
from typing import Any

from starlette.types import ASGIApp, Receive, Scope, Send

from service.api.middleware import RequestIdMiddleware
from service.runtime.preload import WARM_MODULES

BUILD_SECONDS = 300.0

log = logging.getLogger("windvane")

_HEALTHY = json.dumps({"status": "ok"}).encode()


def _starting(path: str) -> bytes:
    return json.dumps(
        {
            "type": "/problems/not-ready",
            "title": "Service Unavailable",
            "status": 503,
            "detail": "the service is still starting up",
            "instance": path,
            "code": "not_ready",
            "errors": [],
        }
    ).encode()


def start_fork_server() -> None:
    """Launch the pool's fork server now, with its preload, so that it imports and warms up
    while this process imports the application (the pool then finds it running)."""
    import multiprocessing
    from multiprocessing import forkserver

    if "forkserver" not in multiprocessing.get_all_start_methods():
        return
    multiprocessing.get_context("forkserver").set_forkserver_preload(list(WARM_MODULES))
    forkserver.ensure_running()


def _build() -> ASGIApp:
    start_fork_server()
    from service.api.app import create_app

    return create_app()


async def _probe(scope: Scope, receive: Receive, send: Send) -> None:
    """/healthz 200 and /readyz 503 while the real app is being built."""
    path = scope.get("path", "")
    healthy = path == "/healthz"
    body = _HEALTHY if healthy else _starting(path)
    kind = b"application/json" if healthy else b"application/problem+json"
    headers = [(b"content-type", kind), (b"content-length", str(len(body)).encode())]
    status = 200 if healthy else 503
    await send({"type": "http.response.start", "status": status, "headers": headers})
    await send({"type": "http.response.body", "body": body})


class Boot:
    """An ASGI app that listens at once and hands every request to the real app once built."""

    def __init__(self) -> None:
        self._early = RequestIdMiddleware(_probe)
        self.app: Any = None
        self._built: asyncio.Event | None = None
        self._lifespan: AbstractAsyncContextManager[Any] | None = None
        self._building: asyncio.Task[None] | None = None

    async def __call__(self, scope: Scope, receive: Receive, send: Send) -> None:
        if scope["type"] == "lifespan":
            await self._run_lifespan(receive, send)
            return
        if self.app is not None:
            await self.app(scope, receive, send)
            return
        if scope["type"] == "http" and scope.get("path") in ("/healthz", "/readyz"):
            await self._early(scope, receive, send)
            return
        if self._built is not None:  # None only when the server runs without a lifespan
            await asyncio.wait_for(self._built.wait(), BUILD_SECONDS)
        if self.app is None:
            raise RuntimeError("the application was not started")
        await self.app(scope, receive, send)

    async def _run_lifespan(self, receive: Receive, send: Send) -> None:
        await receive()  # lifespan.startup
        self._built = asyncio.Event()
        self._building = asyncio.create_task(self._start())
        await send({"type": "lifespan.startup.complete"})
        await receive()  # lifespan.shutdown
        self._building.cancel()
        with contextlib.suppress(asyncio.CancelledError, Exception):
            await self._building
        if self._lifespan is not None:
            await self._lifespan.__aexit__(None, None, None)
        await send({"type": "lifespan.shutdown.complete"})

    async def _start(self) -> None:
        try:
            app = await asyncio.to_thread(_build)
            lifespan = app.router.lifespan_context(app)  # type: ignore[attr-defined]
            await lifespan.__aenter__()
        except Exception:
            # As when an import failed before this boot step: the process ends, so that the
            # orchestrator sees a failed start instead of a server stuck at 503.
            log.exception("the application failed to start")
            logging.shutdown()
            os._exit(3)
        self._lifespan = lifespan
        self.app = app
        if self._built is not None:
            self._built.set()


def create_app() -> Boot:
    """The factory `windvane serve` gives uvicorn."""
    return Boot()
