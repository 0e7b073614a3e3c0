"""The forecast route's cache and telemetry steps: key the request, look up, run, store.

Kept out of the route so that the route reads as validation -> work -> response, and so
the Cache-Status header (RFC 9211) and ``provenance.cache`` are always set together.
"""

from __future__ import annotations

import time
from collections.abc import Awaitable, Callable
from dataclasses import dataclass
from typing import Any

from starlette.requests import Request
from starlette.responses import Response

from service.core.errors import FitError
from service.runtime.cache import Cache
from service.runtime.keys import Key, KeyBuilder
from service.runtime.pool import BudgetExceeded, WorkerCrashed
from service.runtime.telemetry import Telemetry

CACHE_NAME = "windvane"
_STATUS = {
    "hit": f"{CACHE_NAME}; hit",
    "miss": f"{CACHE_NAME}; fwd=miss; stored",
    "off": f"{CACHE_NAME}; fwd=bypass",
}


@dataclass(frozen=True)
class Answer:
    """A response body (without provenance) and whether it came from the cache."""

    body: dict[str, Any]
    cache: str


def response_key(request_body: dict[str, Any], y: Any, seasonal_period: int) -> Key:
    """The whole request: canonical series bytes plus every other field as sorted JSON."""
    options = dict(request_body)
    wire = dict(options.pop("series", {}) or {})
    for bulky in ("values", "timestamps", "start"):
        wire.pop(bulky, None)  # carried by the parsed series' canonical bytes
    return (
        KeyBuilder("response")
        .series(y)
        .text("seasonal_period", str(int(seasonal_period)))
        .json("series_options", wire)
        .json("options", options)
        .versions()
        .finish()
    )


async def answer(
    request: Request,
    response: Response,
    key: Key,
    family: str,
    observations: int,
    compute: Callable[[], Awaitable[dict[str, Any]]],
) -> Answer:
    """The cached body for ``key``, or ``compute()`` run once, timed and stored."""
    cache: Cache = request.app.state.cache
    telemetry: Telemetry = request.app.state.telemetry
    telemetry.record_series_length(observations)
    request.state.series_length = observations
    found = cache.get_response(key)
    if cache.enabled:
        telemetry.record_cache("response", found.result)
    if found.hit and isinstance(found.value, dict):
        return _finish(request, response, Answer(found.value, "hit"))
    body = await _timed(telemetry, family, compute)
    if cache.enabled:
        cache.put_response(key, body, size_estimate(body))
    selection = body.get("selection")
    if selection:
        telemetry.record_selection(str(body.get("model", {}).get("family", "unknown")))
    return _finish(request, response, Answer(body, "miss" if cache.enabled else "off"))


async def _timed(
    telemetry: Telemetry, family: str, compute: Callable[[], Awaitable[dict[str, Any]]]
) -> dict[str, Any]:
    reasons: dict[type[BaseException], str] = {
        BudgetExceeded: "budget",
        WorkerCrashed: "crash",
        FitError: "unfittable",
    }
    started = time.perf_counter()
    try:
        body = await compute()
    except tuple(reasons) as exc:
        reason = next(r for kind, r in reasons.items() if isinstance(exc, kind))
        telemetry.record_fit_failure(family, reason)
        raise
    telemetry.record_fit(family, time.perf_counter() - started)
    return body


def _finish(request: Request, response: Response, result: Answer) -> Answer:
    response.headers["Cache-Status"] = _STATUS[result.cache]
    request.state.cache = result.cache
    model = result.body.get("model") or {}
    if isinstance(model, dict) and model.get("label"):
        request.state.model_label = str(model["label"])
    return result


def size_estimate(body: dict[str, Any]) -> int:
    """Rough bytes held by a body: ~32 per number kept, plus a fixed overhead."""
    numbers = len(body.get("point", []))
    for interval in body.get("intervals", []):
        numbers += len(interval.get("lower", [])) + len(interval.get("upper", []))
    numbers += len(body.get("fitted") or []) + len(body.get("residuals") or [])
    return 32 * numbers + 4096
