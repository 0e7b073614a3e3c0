"""Liveness and readiness."""

from __future__ import annotations

import dataclasses
from typing import Any

from fastapi import APIRouter, Request
from fastapi.responses import JSONResponse, PlainTextResponse, Response

from service.api.dependencies import CacheDep, PoolDep, TelemetryDep
from service.api.problems import problem_response

router = APIRouter(tags=["operations"])


@router.get("/healthz", summary="Liveness")
async def healthz() -> dict[str, str]:
    """The process answers; says nothing about its dependencies."""
    return {"status": "ok"}


@router.get("/readyz", summary="Readiness", responses={503: {"description": "Not ready"}})
async def readyz(request: Request, pool: PoolDep, cache: CacheDep) -> Any:
    """Ready when the worker pool is alive; a cache that could not be written is a detail."""
    checks = {"pool": "ok" if pool.alive() else "broken"}
    state = cache.state()
    # Without a writable directory the service still answers, only slower: degraded, ready.
    checks["cache"] = "off" if not state.enabled else ("degraded" if state.degraded else "ok")
    details = {"pool": dataclasses.asdict(pool.stats()), "cache": dataclasses.asdict(state)}
    if checks["pool"] == "ok":
        return {"status": "ready", "checks": checks, "details": details}
    response: JSONResponse = problem_response(
        503, "not_ready", "the worker pool is not alive", request
    )
    return response


@router.get("/metrics", summary="Prometheus metrics", response_class=PlainTextResponse)
async def metrics(telemetry: TelemetryDep) -> Response:
    """The Prometheus text exposition of this server (every process when several run)."""
    return Response(telemetry.exposition(), media_type=telemetry.content_type)
