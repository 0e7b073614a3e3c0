"""POST /v1/forecasts."""

from __future__ import annotations

from typing import Any

from fastapi import APIRouter, Request, Response

from service import __version__
from service.api import caching
from service.api.convert import parsed_series, specification
from service.api.dependencies import PoolDep, SettingsDep
from service.api.schemas.common import Problem
from service.api.schemas.forecasts import ForecastRequest, ForecastResponse
from service.core.checks import check_coverage, check_positive_int
from service.runtime import jobs
from service.runtime.keys import data_key, runtime_versions

router = APIRouter(prefix="/v1", tags=["forecasts"])

PROBLEMS: dict[int | str, dict[str, Any]] = {
    400: {
        "model": Problem,
        "description": "Malformed JSON",
        "content": {"application/problem+json": {}},
    },
    413: {
        "model": Problem,
        "description": "Body larger than the limit",
        "content": {"application/problem+json": {}},
    },
    422: {
        "model": Problem,
        "description": "Invalid series, option or specification",
        "content": {"application/problem+json": {}},
    },
    503: {
        "model": Problem,
        "description": "Busy (Retry-After) or over the time budget",
        "content": {"application/problem+json": {}},
    },
}


def forecast_task(body: ForecastRequest, settings: Any) -> tuple[jobs.ForecastTask, Any]:
    """Check the request and build the worker's task; 422 problems name the field."""
    series = parsed_series(body.series, settings)
    horizon = check_positive_int(body.horizon, "horizon", settings.max_horizon)
    coverage = check_coverage(body.coverage)
    spec = None if body.model == "auto" else specification(body.model, "model")
    candidates = None
    if body.candidates is not None:
        candidates = tuple(
            specification(c, f"candidates[{i}]") for i, c in enumerate(body.candidates)
        )
    task = jobs.ForecastTask(
        y=series.y,
        seasonal_period=series.seasonal_period,
        specification=spec,
        horizon=horizon,
        coverage=coverage,
        name=series.name,
        include=tuple(body.include),
        candidates=candidates,
        metric=body.metric,
    )
    return task, series


@router.post(
    "/forecasts", summary="Forecast a series", response_model=ForecastResponse, responses=PROBLEMS
)
async def create_forecast(
    body: ForecastRequest,
    pool: PoolDep,
    settings: SettingsDep,
    request: Request,
    response: Response,
) -> dict[str, Any]:
    """Fit the given model (or choose one) and return point forecasts with intervals."""
    task, series = forecast_task(body, settings)
    key = caching.response_key(body.model_dump(mode="json"), series.y, series.seasonal_period)
    family = task.specification.family if task.specification is not None else "auto"
    found = await caching.answer(
        request, response, key, family, len(series.y), lambda: pool.run(jobs.forecast, task)
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
