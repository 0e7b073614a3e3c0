"""Metrics and the request log for every HTTP request, as one pure ASGI middleware.

The route label is the matched route's template (``/v1/forecasts``), never the raw path, so
label values stay bounded; routes add the cache result, model label and series length to
``request.state`` and this middleware writes them into the log line.
"""

from __future__ import annotations

import logging
import time
from typing import Any

from starlette.types import ASGIApp, Message, Receive, Scope, Send

from service.api.middleware import HttpMiddleware
from service.runtime.logs import RequestRecord, log_request
from service.runtime.telemetry import Telemetry

# The client disconnected before the answer (as web servers log it): counted, never a 5xx.
CLIENT_GONE = 499
UNMATCHED = "unmatched"
METHODS = frozenset({"GET", "HEAD", "POST", "PUT", "PATCH", "DELETE", "OPTIONS"})


class ObserveMiddleware(HttpMiddleware):
    """Time each request, count it by route template, method and status, and log one line."""

    def __init__(self, app: ASGIApp, telemetry: Telemetry, logger: logging.Logger) -> None:
        super().__init__(app)
        self.telemetry = telemetry
        self.logger = logger

    async def handle(self, scope: Scope, receive: Receive, send: Send) -> None:
        started = time.perf_counter()
        status = 500

        async def observed_send(message: Message) -> None:
            nonlocal status
            if message["type"] == "http.response.start":
                status = int(message["status"])
            await send(message)

        try:
            await self.app(scope, receive, observed_send)
        finally:
            seconds = time.perf_counter() - started
            if scope.get("state", {}).get("client_gone"):
                status = CLIENT_GONE  # no answer was sent: not a server error
            route = route_template(scope)
            method = str(scope.get("method", "GET"))
            method = method if method in METHODS else "other"
            self.telemetry.record_request(route, method, status, seconds)
            state: dict[str, Any] = scope.get("state", {})
            log_request(
                self.logger,
                RequestRecord(
                    request_id=str(state.get("request_id", "")),
                    route=route,
                    method=method,
                    status=status,
                    duration_seconds=seconds,
                    cache=state.get("cache"),
                    model=state.get("model_label"),
                    series_length=state.get("series_length"),
                ),
            )


def route_template(scope: Scope) -> str:
    """The matched route's path template, or ``unmatched`` (a 404 must not mint a label)."""
    route = scope.get("route")
    path = getattr(route, "path", None)
    return path if isinstance(path, str) else UNMATCHED
