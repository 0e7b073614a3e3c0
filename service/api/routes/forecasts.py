"""POST /v1/forecasts."""

from __future__ import annotations

import asyncio
from typing import Annotated, Any

from fastapi import APIRouter, Body, Request, Response

from service import __version__
from service.api import caching, examples
from service.api.convert import parsed_series, specification
from service.api.dependencies import PoolDep, SettingsDep
from service.api.schemas.common import Problem
from service.api.schemas.forecasts import ForecastRequest, ForecastResponse
from service.core.checks import check_coverage, check_positive_int
from service.core.errors import RequestError
from service.core.models.base import as_dict
from service.core.regressors import regressors_from_wire
from service.core.transforms import transform_from_value
from service.runtime import jobs
from service.runtime.cache import Cache
from service.runtime.keys import data_key, fit_key, runtime_versions
from service.runtime.telemetry import Telemetry

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
    transform = body.transform
    wire_transform = (
        {"kind": transform} if isinstance(transform, str) else transform.model_dump(by_alias=True)
    )
    chosen = transform_from_value(wire_transform)  # a bad transform is a 422 before any work
    if chosen.kind != "none" and not bool((series.y.dropna() > 0).all()):
        raise RequestError(
            f"the {chosen.kind} transform needs strictly positive values", field="transform"
        )
    regressors = None
    if body.regressors:
        if spec is None or spec.family != "arima":
            raise RequestError(
                "regressors are accepted by the arima family only", field="regressors"
            )
        if chosen.kind != "none":
            raise RequestError("regressors cannot be combined with a transform", field="transform")
        wire = [r.model_dump() for r in body.regressors]
        regressors = regressors_from_wire(wire, series.y.index, horizon)
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
        transform=wire_transform,
        regressors=regressors,
    )
    return task, series


async def _computed(request: Request, pool: Any, task: jobs.ForecastTask) -> dict[str, Any]:
    """Run the work; an explicit specification's fitted model is kept in the fit store so
    that a new horizon or coverage on the same data needs no refit."""
    if task.specification is None:
        return dict(await pool.run(jobs.forecast, task))
    cache: Cache = request.app.state.cache
    telemetry: Telemetry = request.app.state.telemetry
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
    responses={**PROBLEMS, **examples.response_example("forecast")},
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
    body: ForecastRequest, pool: Any, settings: Any, request: Request, response: Response
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
