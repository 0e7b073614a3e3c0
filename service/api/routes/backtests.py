"""POST /v1/backtests."""

from __future__ import annotations

from typing import Annotated, Any

from fastapi import APIRouter, Body

from service.api import examples
from service.api.convert import parsed_series, specification
from service.api.dependencies import PoolDep, SettingsDep
from service.api.routes.forecasts import PROBLEMS
from service.api.schemas.backtests import BacktestRequest
from service.core.checks import check_coverage, check_positive_int
from service.core.errors import WindvaneError
from service.runtime import jobs
from service.runtime.keys import data_key

router = APIRouter(prefix="/v1", tags=["backtests"])


@router.post(
    "/backtests",
    summary="Backtest models on a series",
    responses={**PROBLEMS, **examples.response_example("backtest")},
)
async def create_backtest(
    body: Annotated[BacktestRequest, Body(openapi_examples=examples.request_examples("backtest"))],
    pool: PoolDep,
    settings: SettingsDep,
) -> dict[str, Any]:
    """Rolling-origin evaluation: per model and per step MAE, RMSE, MASE, sMAPE, interval
    coverage and scaled interval score, with a ranking by the chosen metric."""
    task = backtest_task(body, settings)
    result = await pool.run(jobs.backtests, task)
    result["data_hash"] = data_key(task.y).label
    return result


def backtest_task(body: BacktestRequest, settings: Any) -> jobs.BacktestTask:
    """Check the request and build the worker's task."""
    series = parsed_series(body.series, settings)
    specs = None
    if body.models != "auto":
        if not body.models:
            raise WindvaneError('give at least one specification, or "auto"', field="models")
        specs = tuple(specification(m, f"models[{i}]") for i, m in enumerate(body.models))
    task = jobs.BacktestTask(
        y=series.y,
        seasonal_period=series.seasonal_period,
        specifications=specs,
        horizon=check_positive_int(body.horizon, "horizon", settings.max_horizon),
        origins=body.origins,
        step=body.step,
        coverage=check_coverage(body.coverage),
        metric=body.metric,
    )
    return task
