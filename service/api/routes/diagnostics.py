"""POST /v1/diagnostics."""

from __future__ import annotations

import asyncio
from typing import Annotated, Any

from fastapi import APIRouter, Body

from service.api import examples
from service.api.decoding import DecodingRoute
from service.api.dependencies import PoolDep, SettingsDep
from service.api.diagnostics_body import diagnostics_body
from service.api.problems import PROBLEM_RESPONSES
from service.api.schemas.diagnostics import DiagnosticsRequest, DiagnosticsResponse
from service.api.tasks import diagnostics_task
from service.runtime import jobs
from service.runtime.keys import data_key

router = APIRouter(prefix="/v1", tags=["diagnostics"], route_class=DecodingRoute)


@router.post(
    "/diagnostics",
    summary="Diagnose a series",
    response_model=DiagnosticsResponse,
    responses={**PROBLEM_RESPONSES, **examples.response_example("diagnostics")},
)
async def create_diagnostics(
    body: Annotated[
        DiagnosticsRequest, Body(openapi_examples=examples.request_examples("diagnostics"))
    ],
    pool: PoolDep,
    settings: SettingsDep,
) -> dict[str, Any]:
    """Stationarity, differencing, autocorrelation, seasonality, outliers and whether the
    series is a random walk, each verdict with its evidence and a plain-sentence finding."""
    task = await asyncio.to_thread(diagnostics_task, body, settings)  # parsing can be slow
    report, found = await pool.run(jobs.diagnostics, task)
    return {**diagnostics_body(report, found), "data_hash": data_key(task.y).label}
