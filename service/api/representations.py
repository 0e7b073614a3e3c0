"""Content negotiation: CSV bodies in; CSV tables, SVG and PNG charts out; 415 and 406 otherwise.

A pure ASGI middleware around the routes, so the routes, their validation and the response
cache see JSON only: a ``text/csv`` body becomes the JSON request it stands for (options from
the query string), and an ``Accept`` of CSV or an image asks the route for JSON and turns the
answer into a table (in the server: formatting) or a chart (rendered in the worker pool,
never on the event loop, and kept in a small in-memory cache keyed by the request bytes).
The media types each endpoint offers and the Accept negotiation are in ``media.py``.
"""

from __future__ import annotations

import asyncio
import hashlib
import json
import logging
from collections import OrderedDict
from collections.abc import Callable
from typing import Any

from starlette.requests import Request
from starlette.types import ASGIApp, Message, Receive, Scope, Send

from service.api import tables
from service.api.auth import route_path
from service.api.convert import parsed_series
from service.api.csv_bodies import (
    BACKTESTS,
    DIAGNOSTICS,
    FORECASTS,
    CsvProblem,
    chart_size,
    csv_request,
)
from service.api.media import (
    CSV,
    CSV_BODIES,
    JSON,
    NDJSON,
    OFFERS,
    PNG,
    SVG,
    media_type,
    negotiate,
)
from service.api.middleware import header, replay
from service.api.pictures import diagnostics_picture, filename, forecast_headers, forecast_picture
from service.api.problems import problem_response
from service.api.schemas.common import SeriesIn
from service.core.errors import WindvaneError
from service.runtime import charts
from service.runtime.pool import BudgetExceeded, PoolBusy

log = logging.getLogger("windvane")

TABLES: dict[str, Callable[[dict[str, Any]], bytes]] = {
    FORECASTS: tables.forecast_table,
    DIAGNOSTICS: tables.correlogram_table,
    BACKTESTS: tables.backtest_table,
}
CHART_CACHE_ENTRIES = 128


class RepresentationMiddleware:
    """CSV in, CSV/SVG/PNG out, 415 and 406 problems; JSON requests pass straight through."""

    def __init__(self, app: ASGIApp) -> None:
        self.app = app
        self.charts: OrderedDict[bytes, bytes] = OrderedDict()

    async def __call__(self, scope: Scope, receive: Receive, send: Send) -> None:
        path = route_path(scope) if scope["type"] == "http" else ""
        if path not in OFFERS or scope.get("method") != "POST":
            await self.app(scope, receive, send)
            return
        content_type = media_type(header(scope, b"content-type"))
        is_csv = content_type == CSV
        refused = _refused_body(content_type, path)
        if refused is not None:
            await self._problem(
                scope, receive, send, 415, "unsupported_media_type", refused, "headers.content-type"
            )
            return
        chosen = negotiate(header(scope, b"accept"), OFFERS[path])
        if chosen is None:
            await self._problem(
                scope,
                receive,
                send,
                406,
                "not_acceptable",
                f"this endpoint answers {', '.join(OFFERS[path])}",
                "headers.accept",
            )
            return
        if not is_csv and chosen in (JSON, NDJSON):
            await self.app(scope, receive, send)
            return
        await self._converted(scope, receive, send, path, is_csv, chosen)

    async def _converted(
        self, scope: Scope, receive: Receive, send: Send, path: str, is_csv: bool, chosen: str
    ) -> None:
        body = await _read(receive)
        query = scope.get("query_string", b"")
        try:
            request = csv_request(path, body, query) if is_csv else json.loads(body)
            size = chart_size(query) if chosen in (SVG, PNG) else (0, 0)
        except CsvProblem as exc:
            await self._problem(scope, receive, send, 422, "invalid_request", str(exc), exc.field)
            return
        except ValueError:  # not JSON: the route answers its own 400
            await self.app(scope, _replayed(body, receive), send)
            return
        json_body = json.dumps(request).encode() if is_csv else body
        inner = dict(scope)
        inner["headers"] = [
            (k, v)
            for k, v in scope.get("headers", [])
            if k not in (b"accept", b"content-type", b"content-length")
        ] + [
            (b"accept", JSON.encode()),
            (b"content-type", JSON.encode()),
            (b"content-length", str(len(json_body)).encode()),
        ]
        try:
            if chosen == JSON:
                await self.app(inner, _replayed(json_body, receive), send)
                return
            captured = await _captured(self.app, inner, _replayed(json_body, receive))
        finally:
            if "route" in inner:  # the metrics and the log name the route the router matched
                scope["route"] = inner["route"]
        status, headers, answer = captured
        if status != 200:
            await _send(send, status, headers, answer)
            return
        result = json.loads(answer)
        kept = [(k, v) for k, v in headers if k in (b"cache-status",)]
        if chosen == CSV:
            out = TABLES[path](result)
            kind = path.rsplit("/", 1)[-1]
            kept += [
                (
                    b"content-disposition",
                    f'attachment; filename="{filename(request, kind, "csv")}"'.encode(),
                )
            ]
            kept += forecast_headers(result) if path == FORECASTS else []
            await _send(send, 200, [(b"content-type", b"text/csv; charset=utf-8"), *kept], out)
            return
        await self._chart(scope, receive, send, path, request, result, chosen, size, json_body)

    async def _chart(
        self,
        scope: Scope,
        receive: Receive,
        send: Send,
        path: str,
        request: dict[str, Any],
        result: dict[str, Any],
        chosen: str,
        size: tuple[int, int],
        json_body: bytes,
    ) -> None:
        fmt = "svg" if chosen == SVG else "png"
        key = hashlib.sha256(
            b"\0".join([path.encode(), json_body, fmt.encode(), f"{size[0]}x{size[1]}".encode()])
        ).digest()
        picture_bytes = self.charts.get(key)
        if picture_bytes is None:
            state = scope["app"].state
            try:
                series = await asyncio.to_thread(
                    parsed_series, SeriesIn.model_validate(request["series"]), state.settings
                )
                if path == FORECASTS:
                    picture: Any = forecast_picture(request, result, series)
                    job: Any = charts.forecast_chart
                else:
                    picture = diagnostics_picture(request, result, series)
                    job = charts.diagnostics_chart
                picture_bytes = await state.pool.run(job, picture, fmt, size[0], size[1])
            except (PoolBusy, BudgetExceeded) as exc:
                retry = str(exc.retry_after if isinstance(exc, PoolBusy) else 1)
                await self._problem(
                    scope,
                    receive,
                    send,
                    503,
                    "overloaded",
                    "the chart could not be rendered now; try again",
                    "accept",
                    {"Retry-After": retry},
                )
                return
            except (WindvaneError, ValueError) as exc:
                await self._problem(
                    scope, receive, send, 422, "invalid_request", str(exc)[:200], "accept"
                )
                return
            except Exception:
                log.exception("rendering a chart failed")
                await self._problem(
                    scope,
                    receive,
                    send,
                    500,
                    "internal_error",
                    "the chart could not be rendered",
                    "accept",
                )
                return
            self.charts[key] = picture_bytes
            while len(self.charts) > CHART_CACHE_ENTRIES:
                self.charts.popitem(last=False)
        else:
            self.charts.move_to_end(key)
        kind = path.rsplit("/", 1)[-1]
        headers = [
            (b"content-type", chosen.encode()),
            (
                b"content-disposition",
                f'inline; filename="{filename(request, kind, fmt)}"'.encode(),
            ),
        ]
        if path == FORECASTS:
            headers += forecast_headers(result)
        await _send(send, 200, headers, picture_bytes)

    async def _problem(
        self,
        scope: Scope,
        receive: Receive,
        send: Send,
        status: int,
        code: str,
        detail: str,
        field: str,
        headers: dict[str, str] | None = None,
    ) -> None:
        response = problem_response(
            status,
            code,
            detail,
            Request(scope),
            title="Invalid request" if status == 422 else None,
            headers=headers,
            errors=[{"field": field, "message": detail}],
        )
        await response(scope, receive, send)


def _refused_body(content_type: str, path: str) -> str | None:
    """Why a body of this media type is not accepted on ``path`` (a 415), or None."""
    if content_type == CSV:
        if path in CSV_BODIES:
            return None
        return f"{CSV} bodies are accepted by {', '.join(CSV_BODIES)}"
    if content_type in ("", JSON) or content_type.endswith("+json"):
        return None
    also = f" or {CSV}" if path in CSV_BODIES else ""
    return f"a body of type {content_type[:60]!r} is not accepted here; send {JSON}{also}"


async def _read(receive: Receive) -> bytes:
    chunks = []
    while True:
        message = await receive()
        if message["type"] != "http.request":
            break
        chunks.append(message.get("body", b""))
        if not message.get("more_body", False):
            break
    return b"".join(chunks)


def _replayed(body: bytes, receive: Receive) -> Receive:
    """The whole body in one message, then the client's stream (its disconnect) as it comes."""
    return replay({"type": "http.request", "body": body, "more_body": False}, receive)


async def _captured(
    app: ASGIApp, scope: Scope, receive: Receive
) -> tuple[int, list[tuple[bytes, bytes]], bytes]:
    """Run the app on ``body`` and keep its answer instead of sending it."""
    start: dict[str, Any] = {}
    chunks: list[bytes] = []

    async def keep(message: Message) -> None:
        if message["type"] == "http.response.start":
            start.update(message)
        elif message["type"] == "http.response.body":
            chunks.append(message.get("body", b""))

    await app(scope, receive, keep)
    headers = [(bytes(k), bytes(v)) for k, v in start.get("headers", [])]
    return int(start.get("status", 500)), headers, b"".join(chunks)


async def _send(send: Send, status: int, headers: list[tuple[bytes, bytes]], body: bytes) -> None:
    kept = [(k, v) for k, v in headers if k.lower() != b"content-length"]
    kept.append((b"content-length", str(len(body)).encode()))
    await send({"type": "http.response.start", "status": status, "headers": kept})
    await send({"type": "http.response.body", "body": body})
