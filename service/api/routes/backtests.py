"""POST /v1/backtests."""

from __future__ import annotations

import asyncio
from typing import Annotated, Any

from fastapi import APIRouter, Body

from service.api import examples, render
from service.api.decoding import DecodingRoute
from service.api.dependencies import PoolDep, SettingsDep
from service.api.problems import PROBLEM_RESPONSES
from service.api.schemas.backtests import BacktestRequest, BacktestResponse
from service.api.tasks import backtest_task
from service.runtime import jobs
from service.runtime.keys import data_key

router = APIRouter(prefix="/v1", tags=["backtests"], route_class=DecodingRoute)


@router.post(
    "/backtests",
    summary="Backtest models on a series",
    response_model=BacktestResponse,
    responses={**PROBLEM_RESPONSES, **examples.response_example("backtest")},
)
async def create_backtest(
    body: Annotated[BacktestRequest, Body(openapi_examples=examples.request_examples("backtest"))],
    pool: PoolDep,
    settings: SettingsDep,
) -> dict[str, Any]:
    """Rolling-origin evaluation: per model and per step MAE, RMSE, MASE, sMAPE, interval
    coverage and scaled interval score, with a ranking by the chosen metric."""
    task = await asyncio.to_thread(backtest_task, body, settings)  # parsing can be slow
    report, found = await pool.run(jobs.backtests, task)
    return {**render.backtest_body(report, found), "data_hash": data_key(task.y).label}
