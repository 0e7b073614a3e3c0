"""Liveness and readiness."""

from __future__ import annotations

from typing import Any

from fastapi import APIRouter, Request
from fastapi.responses import JSONResponse

from service.api.dependencies import PoolDep
from service.api.problems import problem_response

router = APIRouter(tags=["operations"])


@router.get("/healthz", summary="Liveness")
async def healthz() -> dict[str, str]:
    """The process answers; says nothing about its dependencies."""
    return {"status": "ok"}


@router.get("/readyz", summary="Readiness", responses={503: {"description": "Not ready"}})
async def readyz(request: Request, pool: PoolDep) -> Any:
    """Ready when the worker pool is alive (and the cache, when on, is writable)."""
    checks = {"pool": "ok" if pool.alive() else "broken"}
    if all(v == "ok" for v in checks.values()):
        return {"status": "ready", "checks": checks}
    response: JSONResponse = problem_response(503, "not_ready", "the worker pool is not alive",
                                              request)
    return response
