"""POST /v1/forecast-batches: several forecast requests in one call."""

from __future__ import annotations

from typing import Any

from pydantic import BaseModel, Field

from service.api.schemas.common import Problem, Strict
from service.api.schemas.forecasts import ForecastRequest, ForecastResponse


class BatchRequest(Strict):
    """Forecast requests answered together; each succeeds or fails on its own."""

    requests: list[ForecastRequest] = Field(
        min_length=1, description="Forecast requests; at most WINDVANE_MAX_BATCH_SERIES."
    )


class BatchItem(BaseModel):
    """The answer to one request of a batch: a forecast, or a problem."""

    index: int
    status: int
    forecast: ForecastResponse | None = None
    problem: Problem | None = None


class BatchResponse(BaseModel):
    """One item per request, in request order."""

    results: list[BatchItem]
    succeeded: int
    failed: int


def item(index: int, status: int, **parts: Any) -> dict[str, Any]:
    """A batch item as a plain dict."""
    return {"index": index, "status": status, **parts}
