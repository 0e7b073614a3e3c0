"""POST /v1/forecasts."""

from __future__ import annotations

import asyncio
from typing import Annotated, Any

from fastapi import APIRouter, Body, Request, Response

from service import __version__
from service.api import caching, examples
from service.api.dependencies import PoolDep, SettingsDep, get_cache, get_telemetry
from service.api.problems import PROBLEM_RESPONSES
from service.api.schemas.forecasts import ForecastRequest, ForecastResponse
from service.api.tasks import forecast_task
from service.config import Settings
from service.core.models.base import as_dict
from service.runtime import jobs
from service.runtime.keys import data_key, fit_key, runtime_versions
from service.runtime.pool import WorkPool

router = APIRouter(prefix="/v1", tags=["forecasts"])


async def _computed(request: Request, pool: WorkPool, task: jobs.ForecastTask) -> dict[str, Any]:
    """Run the work; an explicit specification's fitted model is kept in the fit store so
    that a new horizon or coverage on the same data needs no refit."""
    if task.specification is None:
        return dict(await pool.run(jobs.forecast, task))
    cache = get_cache(request)
    telemetry = get_telemetry(request)
    options: dict[str, Any] = {"transform": task.transform}
    if task.regressors is not None:
        history = task.regressors.history
        options["regressors"] = {str(c): history[c].tolist() for c in history.columns}
    key = fit_key(task.y, task.seasonal_period, as_dict(task.specification), options)
    stored = await asyncio.to_thread(cache.load_fitted, key)
    if cache.enabled:
        telemetry.record_cache("fitted", stored.result)
    if stored.hit and isinstance(stored.value, jobs.FittedBundle):
        return dict(await pool.run(jobs.forecast_from, stored.value, task))
    body, bundle = await pool.run(jobs.fit_and_forecast, task)
    if cache.enabled:
        await asyncio.to_thread(cache.save_fitted, key, bundle)
    return dict(body)


@router.post(
    "/forecasts",
    summary="Forecast a series",
    response_model=ForecastResponse,
    responses={**PROBLEM_RESPONSES, **examples.response_example("forecast")},
)
async def create_forecast(
    body: Annotated[ForecastRequest, Body(openapi_examples=examples.request_examples("forecast"))],
    pool: PoolDep,
    settings: SettingsDep,
    request: Request,
    response: Response,
) -> dict[str, Any]:
    """Fit the given model (or choose one) and return point forecasts with intervals."""
    return await answer_forecast(body, pool, settings, request, response)


async def answer_forecast(
    body: ForecastRequest,
    pool: WorkPool,
    settings: Settings,
    request: Request,
    response: Response,
) -> dict[str, Any]:
    """One forecast through validation, the caches and the pool (also used by batches)."""
    task, series = forecast_task(body, settings)
    key = caching.response_key(body.model_dump(mode="json"), series.y, series.seasonal_period)
    family = task.specification.family if task.specification is not None else "auto"
    found = await caching.answer(
        request, response, key, family, len(series.y), lambda: _computed(request, pool, task)
    )
    # A new dict each time: the cached body itself is never changed.
    return {
        **found.body,
        "provenance": {
            "data_hash": data_key(series.y).label,
            "cache": found.cache,
            "service_version": __version__,
            "library_versions": runtime_versions(),
        },
    }
