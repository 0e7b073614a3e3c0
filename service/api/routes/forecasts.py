"""POST /v1/forecasts."""

from __future__ import annotations

import asyncio
import json
from collections.abc import Callable
from typing import Annotated, Any, Protocol, TypeVar

from fastapi import APIRouter, Body, Request, Response

from service.api import caching, examples, render
from service.api.decoding import DecodingRoute
from service.api.dependencies import PoolDep, SettingsDep, get_cache, get_telemetry
from service.api.problems import PROBLEM_RESPONSES
from service.api.schemas.forecasts import ForecastRequest, ForecastResponse
from service.api.tasks import forecast_task
from service.config import Settings
from service.core.models.base import as_dict
from service.runtime import jobs
from service.runtime.keys import Key, data_key, fit_key

router = APIRouter(prefix="/v1", tags=["forecasts"], route_class=DecodingRoute)
T = TypeVar("T")
# The Accept value in the cache key of batch items: what HTTP clients send by default, so
# an item shares its entry with the usual single request on the same data.
ITEM_ACCEPT = "*/*"


class Runner(Protocol):
    """What a forecast needs of the pool (a batch hands in one bounded by its deadline)."""

    async def run(
        self,
        fn: Callable[..., T],
        *args: Any,
        budget_seconds: float | None = None,
        spread: bool = False,
    ) -> T: ...


def fit_key_for(task: jobs.ForecastTask) -> Key:
    """The fit store's key of an explicit specification: data, specification, fit options."""
    assert task.specification is not None
    options: dict[str, Any] = {"transform": task.transform}
    if task.regressors is not None:
        history = task.regressors.history
        options["regressors"] = {str(c): history[c].tolist() for c in history.columns}
    return fit_key(task.y, task.seasonal_period, as_dict(task.specification), options)


async def _computed(
    request: Request, pool: Runner, task: jobs.ForecastTask
) -> tuple[dict[str, Any], caching.FittedState]:
    """Run the work; an explicit specification's fitted model is kept in the fit store so
    that a new horizon or coverage on the same data needs no refit."""
    cache = get_cache(request)
    if task.specification is None or not cache.enabled:
        # Model auto may spread its candidates over workers that are idle (runtime/spread.py).
        answer = await pool.run(jobs.forecast, task, spread=task.specification is None)
        return render.forecast_answer(answer), None
    key = fit_key_for(task)
    stored = await asyncio.to_thread(cache.load_fitted, key)
    answer, fresh = await pool.run(jobs.forecast_stored, stored.value if stored.hit else None, task)
    served = stored.hit and fresh is None
    # An entry found that no longer loads in the worker counts as an error, as a damaged one.
    get_telemetry(request).record_cache(
        "fitted", "error" if stored.hit and not served else stored.result
    )
    body = render.forecast_answer(answer)  # an overflowing forecast is refused before storing
    if fresh is not None:
        await asyncio.to_thread(cache.save_fitted, key, fresh)
    return body, "hit" if served else "miss"


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
) -> Response:
    """Fit the given model (or choose one) and return point forecasts with intervals."""
    found = await forecast_answer(body, pool, settings, request)
    if found.state != "off":
        request.state.stored_response = found.stored  # kept under the request bytes' key too
    return Response(
        found.body(), media_type="application/json", headers={"Cache-Status": found.status}
    )


async def forecast_answer(
    body: ForecastRequest,
    pool: Runner,
    settings: Settings,
    request: Request,
    accept: str | None = None,
) -> caching.Answer:
    """One forecast through the response cache, validation, the fit store and the pool;
    ``accept`` replaces the request's header in the key (a batch item's is its own)."""
    if accept is None:
        accept = request.headers.get("accept", "")
    # Dumping and hashing 100,000 values canonically takes a quarter of a second: off the loop.
    key = await asyncio.to_thread(
        lambda: caching.validated_key(
            body.model_dump(mode="json"), accept or "", settings.library_versions
        )
    )
    telemetry = get_telemetry(request)

    async def compute() -> caching.Computed:
        # Parsing 100,000 timestamps (or finding a bad one) takes a while: off the loop.
        task, series = await asyncio.to_thread(forecast_task, body, settings)
        family = task.specification.family if task.specification is not None else "auto"
        result, fitted = await caching.timed(
            telemetry, family, lambda: _computed(request, pool, task)
        )
        if result.get("selection"):
            telemetry.record_selection(str(result.get("model", {}).get("family", "unknown")))
        provenance = {
            "data_hash": data_key(series.y).label,
            **caching.provenance_fields(settings.library_versions),
        }
        return caching.stored_response(result, provenance, len(series.y)), fitted

    return await caching.answer(request, key, compute)


async def answer_forecast(body: ForecastRequest, pool: Runner, request: Request) -> dict[str, Any]:
    """One batch item's forecast as a plain body, keyed as a JSON answer whatever the batch's
    own Accept header (the NDJSON and JSON batches, and `windvane batch`, share entries)."""
    settings: Settings = request.app.state.settings
    found = await forecast_answer(body, pool, settings, request, ITEM_ACCEPT)
    return dict(json.loads(found.body()))
