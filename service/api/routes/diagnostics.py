"""POST /v1/diagnostics."""

from __future__ import annotations

from typing import Any

from fastapi import APIRouter

from service.api.convert import parsed_series
from service.api.dependencies import PoolDep, SettingsDep
from service.api.routes.forecasts import PROBLEMS
from service.api.schemas.diagnostics import DiagnosticsRequest
from service.runtime import jobs
from service.runtime.keys import data_key

router = APIRouter(prefix="/v1", tags=["diagnostics"])


@router.post("/diagnostics", summary="Diagnose a series", responses=PROBLEMS)
async def create_diagnostics(
    body: DiagnosticsRequest, pool: PoolDep, settings: SettingsDep
) -> dict[str, Any]:
    """Stationarity, differencing, autocorrelation, seasonality, outliers and whether the
    series is a random walk, each verdict with its evidence and a plain-sentence finding."""
    series = parsed_series(body.series, settings)
    task = jobs.DiagnosticsTask(
        series.y, series.seasonal_period, body.max_lag, "components" in body.include
    )
    result = await pool.run(jobs.diagnostics, task)
    result["data_hash"] = data_key(series.y).label
    return result
