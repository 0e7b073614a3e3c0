"""POST /v1/diagnostics."""

from __future__ import annotations

from typing import Annotated, Any

from fastapi import APIRouter, Body

from service.api import examples
from service.api.convert import parsed_series
from service.api.dependencies import PoolDep, SettingsDep
from service.api.routes.forecasts import PROBLEMS
from service.api.schemas.diagnostics import DiagnosticsRequest
from service.runtime import jobs
from service.runtime.keys import data_key

router = APIRouter(prefix="/v1", tags=["diagnostics"])


@router.post(
    "/diagnostics",
    summary="Diagnose a series",
    responses={**PROBLEMS, **examples.response_example("diagnostics")},
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
    task = diagnostics_task(body, settings)
    result = await pool.run(jobs.diagnostics, task)
    result["data_hash"] = data_key(task.y).label
    return result


def diagnostics_task(body: DiagnosticsRequest, settings: Any) -> jobs.DiagnosticsTask:
    """Check the request and build the worker's task."""
    # The core interpolates on its own and says so; it must see which values were missing.
    wire = body.series
    if wire.missing == "interpolate":
        wire = wire.model_copy(update={"missing": "keep"})
    series = parsed_series(wire, settings)
    return jobs.DiagnosticsTask(
        series.y, series.seasonal_period, body.max_lag, "components" in body.include
    )
