"""The forecast route's cache steps: key the request, look it up, run the work once, store.

A finished response is looked up before any series parsing: by a hash of the request
bytes in ``hits.py`` (no parsing at all), and here by a hash of the validated request (a
batch item, or the same request formatted differently), in memory, then on disk. Identical
requests that arrive while one is being computed wait for it instead of computing again.
The answer is kept as bytes with a gap for ``provenance.cache``, so that a hit only joins
bytes, and the Cache-Status header (RFC 9211) names the layer that answered: the response
cache, the fitted-model store, or neither.
"""

from __future__ import annotations

import asyncio
import json
import time
from collections.abc import Awaitable, Callable
from dataclasses import dataclass
from functools import cache
from typing import Any

from starlette.requests import Request

from service import __version__
from service.api.schemas.forecasts import ForecastResponse
from service.config import Settings
from service.core.errors import FitError
from service.runtime.cache import Cache, Claim, Lookup, StoredResponse
from service.runtime.keys import Key, KeyBuilder, canonical_json, runtime_versions
from service.runtime.pool import BudgetExceeded, WorkerCrashed
from service.runtime.telemetry import Telemetry


def cache_from(settings: Settings) -> Cache:
    """The response and fitted-model cache a deployment's settings describe."""
    secret = settings.cache_secret
    return Cache(
        enabled=settings.cache == "on",
        directory=settings.cache_dir,
        max_bytes=settings.cache_max_bytes,
        response_entries=settings.cache_memory_items,
        response_bytes=settings.cache_memory_bytes,
        secret=secret.get_secret_value().encode() if secret is not None else None,
        retry_seconds=settings.cache_retry_seconds,
    )


RESPONSES = "windvane-response"
FITTED = "windvane-fitted"
FORECASTS_PATH = "/v1/forecasts"
# How often a request polls the disk while another process computes the same answer.
CLAIM_POLL_SECONDS = 0.05

# What the fitted-model store did for a computed answer: None when it was not asked (auto).
FittedState = str | None
Computed = tuple[StoredResponse, FittedState]


@dataclass(frozen=True)
class Answer:
    """A finished response, its ``provenance.cache`` state and its Cache-Status header."""

    stored: StoredResponse
    state: str
    status: str

    def body(self) -> bytes:
        """The JSON bytes sent to the caller."""
        return self.stored.body(self.state)


def cache_status(state: str, layer: str = "memory", fitted: FittedState = None) -> str:
    """The Cache-Status value: the fitted-model store first (nearest the origin), then ours."""
    if state == "off":
        return f"{RESPONSES}; fwd=bypass"
    if state == "hit":
        return f"{RESPONSES}; hit; detail={layer}"
    response = f"{RESPONSES}; fwd=miss; stored"
    if fitted == "hit":
        return f"{FITTED}; hit, {response}"
    if fitted is not None:
        return f"{FITTED}; fwd=miss; stored, {response}"
    return response


MEMORY_HIT = cache_status("hit")


def provenance_fields(library_versions: bool = True) -> dict[str, Any]:
    """The parts of ``provenance`` that depend on this deployment, not on the request; the
    exact library versions only when the settings show them (WINDVANE_LIBRARY_VERSIONS)."""
    return {
        "service_version": __version__,
        "library_versions": runtime_versions() if library_versions else {},
    }


@cache
def _deployment(library_versions: bool = True) -> bytes:
    # The versions always key the entry (replicas may share the disk); the flag too, since
    # it changes the stored bytes.
    return canonical_json({**provenance_fields(), "versions_shown": library_versions})


def wire_key(
    path: str,
    raw: bytes,
    content_type: bytes,
    accept: bytes,
    query: bytes = b"",
    library_versions: bool = True,
) -> Key:
    """Key of the request exactly as sent: its body bytes, the headers that shape the answer,
    and the deployment's provenance. Hashing the bytes costs a few microseconds, where
    re-serializing the JSON in a canonical order cost more than validating it; the same
    request formatted differently is caught after validation (``validated_key``)."""
    return (
        KeyBuilder("request")
        .text("path", path)
        .raw("query", query)
        .raw("content_type", content_type)
        .raw("accept", accept)
        .raw("body", raw)
        .raw("provenance", _deployment(library_versions))
        .finish()
    )


def validated_key(body: dict[str, Any], accept: str, library_versions: bool = True) -> Key:
    """Key of the validated request (defaults filled in): batch items share it."""
    return (
        KeyBuilder("validated request")
        .text("path", FORECASTS_PATH)
        .text("accept", accept)
        .json("body", body)
        .raw("provenance", _deployment(library_versions))
        .finish()
    )


def stored_response(
    body: dict[str, Any], provenance: dict[str, Any], observations: int
) -> StoredResponse:
    """Check ``body`` against the response schema and serialize it once, as FastAPI would,
    with ``provenance`` last and a gap where its ``cache`` state goes."""
    checked = ForecastResponse.model_validate(
        {**body, "provenance": {**provenance, "cache": "hit"}}
    )
    plain = checked.model_dump(mode="json")
    fixed = plain.pop("provenance")
    del fixed["cache"]
    head = _json(plain)[:-1] + b',"provenance":{"cache":"'
    rest = _json(fixed)[1:]
    tail = b'"' + (b"," + rest if rest != b"}" else rest) + b"}"
    model = plain.get("model") or {}
    label = str(model["label"]) if isinstance(model, dict) and model.get("label") else None
    return StoredResponse(head, tail, label, observations)


def _json(value: Any) -> bytes:
    """Starlette's JSONResponse rendering."""
    return json.dumps(
        value, ensure_ascii=False, allow_nan=False, indent=None, separators=(",", ":")
    ).encode("utf-8")


async def answer(request: Request, key: Key, compute: Callable[[], Awaitable[Computed]]) -> Answer:
    """The stored answer for ``key`` (memory, then disk), or ``compute()`` run once."""
    cache: Cache = request.app.state.cache
    telemetry: Telemetry = request.app.state.telemetry
    if not cache.enabled:
        stored, _ = await compute()
        return _finish(request, telemetry, Answer(stored, "off", cache_status("off")))
    flights: dict[str, asyncio.Future[None]] = request.app.state.flights
    while True:
        found = cache.get_response(key)
        if found.hit:
            break
        running = flights.get(key.digest)
        if running is None:
            break
        # An identical request is being computed: wait for it rather than compute again.
        await asyncio.shield(running)
    if found.hit and found.value is not None:
        telemetry.record_cache("response", "hit")
        return _finish(request, telemetry, Answer(found.value, "hit", MEMORY_HIT))
    done: asyncio.Future[None] = asyncio.get_running_loop().create_future()
    flights[key.digest] = done
    try:
        found, claim = await _stored_or_claimed(cache, key, _claim_wait(request))
        telemetry.record_cache("response", found.result)
        if found.hit and found.value is not None:
            return _finish(
                request, telemetry, Answer(found.value, "hit", cache_status("hit", "disk"))
            )
        try:
            stored, fitted = await compute()
            cache.put_response(key, stored)
            await asyncio.to_thread(cache.save_response, key, stored)
        finally:
            claim.release()
        return _finish(
            request, telemetry, Answer(stored, "miss", cache_status("miss", fitted=fitted))
        )
    finally:
        del flights[key.digest]
        done.set_result(None)


def _claim_wait(request: Request) -> float:
    """How long to wait for another process computing the same answer: its time budget."""
    settings = getattr(request.app.state, "settings", None)
    return float(getattr(settings, "fit_seconds", 30.0)) + 5.0


async def _stored_or_claimed(
    cache: Cache, key: Key, wait_seconds: float
) -> tuple[Lookup[StoredResponse], Claim]:
    """The answer from disk, or the claim to compute it. While another process (an HTTP
    worker, a replica on the same volume) computes it, wait for its entry rather than
    compute it a second time; past ``wait_seconds`` compute anyway."""
    deadline = time.monotonic() + wait_seconds
    while True:
        found = await asyncio.to_thread(cache.load_response, key)
        if found.hit:
            return found, Claim(True)
        claim = await asyncio.to_thread(cache.claim, key)
        if claim.held or time.monotonic() > deadline:
            if claim.held:
                # The other process may have stored it between the read and the claim.
                again = await asyncio.to_thread(cache.load_response, key)
                if again.hit:
                    claim.release()
                    return again, Claim(True)
            return found, claim
        await asyncio.sleep(CLAIM_POLL_SECONDS)


async def timed(telemetry: Telemetry, family: str, compute: Callable[[], Awaitable[Any]]) -> Any:
    """Run the work, recording its time or the reason it failed, by family."""
    reasons: dict[type[BaseException], str] = {
        BudgetExceeded: "budget",
        WorkerCrashed: "crash",
        FitError: "unfittable",
    }
    started = time.perf_counter()
    try:
        result = await compute()
    except tuple(reasons) as exc:
        reason = next(r for kind, r in reasons.items() if isinstance(exc, kind))
        telemetry.record_fit_failure(family, reason)
        raise
    telemetry.record_fit(family, time.perf_counter() - started)
    return result


def _finish(request: Request, telemetry: Telemetry, result: Answer) -> Answer:
    request.state.cache = result.state
    if result.stored.label:
        request.state.model_label = result.stored.label
    if result.stored.observations is not None:
        request.state.series_length = result.stored.observations
        telemetry.record_series_length(result.stored.observations)
    return result
