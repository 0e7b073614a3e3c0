"""The cache hit that does almost no work: POST /v1/forecasts answered from the request bytes.

A pure ASGI middleware inside the API-key check: it hashes the body bytes as received with
the headers that shape the answer, and when the in-memory response
cache holds that key it sends the stored bytes with ``provenance.cache`` set to ``hit``;
no pydantic validation, no series parsing, no serialization. Otherwise the request goes on
to the route, which leaves its finished answer in ``request.state.stored_response`` to be
kept under this key as well. The request id, metrics and log line come from the outer
middleware as for any request.
"""

from __future__ import annotations

from types import SimpleNamespace

from starlette.types import ASGIApp, Receive, Scope, Send

from service.api.auth import route_path
from service.api.caching import FORECASTS_PATH, MEMORY_HIT, wire_key
from service.api.middleware import header, replay
from service.runtime.cache import Cache, StoredResponse
from service.runtime.telemetry import Telemetry

# What the observing middleware reads of a matched route: its path template.
_ROUTE = SimpleNamespace(path=FORECASTS_PATH)
_HIT_HEADERS = [(b"content-type", b"application/json"), (b"cache-status", MEMORY_HIT.encode())]


class ResponseHitMiddleware:
    """Answer a repeated forecast request from memory before the route parses anything."""

    def __init__(self, app: ASGIApp) -> None:
        self.app = app

    async def __call__(self, scope: Scope, receive: Receive, send: Send) -> None:
        if (
            scope["type"] != "http"
            or route_path(scope) != FORECASTS_PATH
            or scope.get("method") != "POST"
        ):
            await self.app(scope, receive, send)
            return
        state = scope["app"].state
        cache: Cache | None = getattr(state, "cache", None)
        if cache is None or not cache.enabled:
            await self.app(scope, receive, send)
            return
        message = await receive()
        if message["type"] != "http.request" or message.get("more_body", False):
            # Only a body read in one piece (the body-limit middleware replays it so).
            await self.app(scope, replay(message, receive), send)
            return
        key = wire_key(
            FORECASTS_PATH,
            message.get("body", b""),
            header(scope, b"content-type").encode("latin-1"),
            header(scope, b"accept").encode("latin-1"),
            scope.get("query_string", b""),
            state.settings.library_versions,
        )
        found = cache.get_response(key)
        if found.hit and found.value is not None:
            await self._send_hit(scope, send, found.value, state.telemetry)
            return
        await self.app(scope, replay(message, receive), send)
        stored = scope.get("state", {}).get("stored_response")
        if isinstance(stored, StoredResponse):
            cache.put_response(key, stored)

    async def _send_hit(
        self, scope: Scope, send: Send, stored: StoredResponse, telemetry: Telemetry
    ) -> None:
        telemetry.record_cache("response", "hit")
        state = scope.setdefault("state", {})
        state["cache"] = "hit"
        if stored.label:
            state["model_label"] = stored.label
        if stored.observations is not None:
            state["series_length"] = stored.observations
            telemetry.record_series_length(stored.observations)
        # The metrics and the log line name the route template, as if the router had run.
        scope["route"] = _ROUTE
        body = stored.body("hit")
        headers = [*_HIT_HEADERS, (b"content-length", str(len(body)).encode())]
        await send({"type": "http.response.start", "status": 200, "headers": headers})
        await send({"type": "http.response.body", "body": body})
