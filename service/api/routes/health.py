"""Liveness and readiness."""

from __future__ import annotations

import dataclasses
from typing import Any

from fastapi import APIRouter, Request
from fastapi.responses import JSONResponse, PlainTextResponse, Response

from service.api.auth import bearer_token
from service.api.dependencies import CacheDep, PoolDep, TelemetryDep
from service.api.problems import PROBLEM_MEDIA_TYPE, problem_response
from service.api.schemas.health import Liveness, Readiness

router = APIRouter(tags=["operations"])


@router.get(
    "/healthz",
    summary="Liveness",
    response_model=Liveness,
    responses={200: {"content": {"application/json": {"example": {"status": "ok"}}}}},
)
async def healthz() -> dict[str, str]:
    """The process answers; says nothing about its dependencies."""
    return {"status": "ok"}


READY_EXAMPLE = {
    "status": "ready",
    "checks": {"pool": "ok", "cache": "ok"},
    "details": {
        "pool": {
            "workers": 2,
            "alive": 2,
            "busy": 0,
            "queued": 0,
            "recycled": 0,
            "start_method": "forkserver",
        },
        "cache": {
            "enabled": True,
            "responses": 12,
            "disk_entries": 3,
            "disk_bytes": 5120,
            "directory": "/var/cache/windvane",
            "degraded": None,
        },
    },
}


@router.get(
    "/readyz",
    summary="Readiness",
    response_model=Readiness,
    responses={
        200: {"content": {"application/json": {"example": READY_EXAMPLE}}},
        503: {"description": "Not ready", "content": {PROBLEM_MEDIA_TYPE: {}}},
    },
)
async def readyz(request: Request, pool: PoolDep, cache: CacheDep) -> Any:
    """Ready when the worker pool is warm, alive and not saturated; a cache that could not
    be written is a detail (the service still answers, only slower)."""
    checks = {"pool": pool.readiness()}
    state = cache.state()
    # Without a writable directory the service still answers, only slower: degraded, ready.
    checks["cache"] = "off" if not state.enabled else ("degraded" if state.degraded else "ok")
    details = {"pool": dataclasses.asdict(pool.stats()), "cache": cache_details(request, state)}
    if checks["pool"] == "ok":
        return {"status": "ready", "checks": checks, "details": details}
    reason = {
        "warming": "the worker pool is still starting up",
        "saturated": "every worker is busy and the queue is full",
    }.get(checks["pool"], "the worker pool is not alive")
    response: JSONResponse = problem_response(503, "not_ready", reason, request)
    return response


def cache_details(request: Request, state: Any) -> dict[str, Any]:
    """The cache's state; its directory and the OS error text only for a caller with a key.

    Readiness is open to orchestrators, so an anonymous caller must not learn file-system
    paths or error messages; the server log has them.
    """
    details = dataclasses.asdict(state)
    ring = getattr(request.app.state, "key_ring", None)
    token = bearer_token(request.scope)
    if ring is not None and ring.enabled and token is not None and ring.accepts(token):
        return details
    details["directory"] = None
    if details.get("degraded"):
        details["degraded"] = "the disk cache is not usable; the server log says why"
    return details


METRICS_EXAMPLE = (
    "# HELP windvane_requests_total HTTP requests by route template, method and status code.\n"
    "# TYPE windvane_requests_total counter\n"
    'windvane_requests_total{method="POST",route="/v1/forecasts",status="200"} 12.0\n'
)


@router.get(
    "/metrics",
    summary="Prometheus metrics",
    response_class=PlainTextResponse,
    responses={200: {"content": {"text/plain": {"example": METRICS_EXAMPLE}}}},
)
async def metrics(telemetry: TelemetryDep) -> Response:
    """The Prometheus text exposition of this server (every process when several run)."""
    return Response(telemetry.exposition(), media_type=telemetry.content_type)
