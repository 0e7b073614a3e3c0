"""POST /v1/forecast-batches: fan several forecasts out to the pool, each failing alone."""

from __future__ import annotations

import asyncio
import json
from typing import Annotated, Any

from fastapi import APIRouter, Body, Request, Response

from service.api import examples
from service.api.dependencies import PoolDep, SettingsDep
from service.api.problems import PROBLEM_RESPONSES, domain_errors, problem_response
from service.api.routes.forecasts import answer_forecast
from service.api.schemas.batches import BatchRequest, BatchResponse, item
from service.api.schemas.forecasts import ForecastRequest
from service.core.errors import RequestError, WindvaneError
from service.runtime.pool import BudgetExceeded, PoolBusy, WorkerCrashed

router = APIRouter(prefix="/v1", tags=["forecasts"])


@router.post(
    "/forecast-batches",
    summary="Forecast several series",
    response_model=BatchResponse,
    responses=PROBLEM_RESPONSES,
)
async def create_batch(
    body: Annotated[BatchRequest, Body(openapi_examples=examples.request_examples("batch"))],
    pool: PoolDep,
    settings: SettingsDep,
    request: Request,
) -> dict[str, Any]:
    """Answer each request as POST /v1/forecasts would; a failing one becomes a problem item
    and the others still succeed. At most as many run at once as the pool has workers."""
    if len(body.requests) > settings.max_batch_series:
        raise RequestError(
            f"a batch holds at most {settings.max_batch_series} requests", field="requests"
        )
    gate = asyncio.Semaphore(max(1, pool.workers))

    async def one(index: int, single: ForecastRequest) -> dict[str, Any]:
        async with gate:
            try:
                found = await answer_forecast(single, pool, settings, request, Response())
                return item(index, 200, forecast=found)
            except WindvaneError as exc:
                problems = domain_errors(exc, f"requests[{index}]")
                problem = problem_response(
                    422, exc.code, exc.message, request, title=exc.title, errors=problems
                )
            except (PoolBusy, BudgetExceeded, WorkerCrashed) as exc:
                problem = problem_response(503, "unavailable", str(exc), request)
            return item(index, problem.status_code, problem=json.loads(bytes(problem.body)))

    results = await asyncio.gather(*(one(i, r) for i, r in enumerate(body.requests)))
    succeeded = sum(1 for r in results if r["status"] == 200)
    return {"results": results, "succeeded": succeeded, "failed": len(results) - succeeded}
