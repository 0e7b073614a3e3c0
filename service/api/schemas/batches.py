"""POST /v1/forecast-batches: many forecast requests in one call, answered item by item."""

from __future__ import annotations

from typing import Any

from pydantic import BaseModel, Field

from service.api.schemas.common import Problem, Strict
from service.api.schemas.forecasts import ForecastRequest, ForecastResponse

ID_LENGTH = 200


class BatchEntry(ForecastRequest):
    """A forecast request as a batch item: POST /v1/forecasts' body plus the caller's `id`."""

    id: str | None = Field(
        None, max_length=ID_LENGTH, description="The caller's name for the item, echoed back."
    )


class BatchRequest(Strict):
    """Forecast requests answered together; each succeeds or fails on its own (a malformed
    item included), and they run in parallel across the pool."""

    requests: list[BatchEntry] = Field(
        min_length=1, description="Forecast requests; at most WINDVANE_MAX_BATCH_SERIES."
    )


class BatchEnvelope(Strict):
    """The batch body as first read: the items are checked one by one afterwards."""

    requests: list[Any] = Field(min_length=1)


class BatchItem(BaseModel):
    """The answer to one request of a batch: a forecast, or a problem (`not_run` when the
    batch's time budget ran out before it)."""

    index: int = Field(description="Position of the request in `requests`.")
    id: str | None = Field(None, description="The request's `id`, echoed.")
    status: int = Field(description="200, or the problem's status.")
    forecast: ForecastResponse | None = None
    problem: Problem | None = None


class LeastSkill(BaseModel):
    """One of the series with the least skill over the naive benchmark."""

    series_id: str
    skill_over_naive: float


class PortfolioOut(BaseModel):
    """What to read before trusting a batch's numbers."""

    series: int
    answered: int
    failed: int
    not_run: int
    verdicts: dict[str, int] = Field(
        description="Answered series by verdict: forecastable, random_walk, "
        "no_skill_over_naive, not_assessed (an explicit model has no backtest)."
    )
    median_skill_over_naive: float | None
    least_skill: list[LeastSkill] = Field(description="Up to 5 series, least skill first.")


class BatchResponse(BaseModel):
    """One item per request in request order, the counts and the portfolio summary."""

    results: list[BatchItem]
    succeeded: int
    failed: int
    not_run: int
    summary: PortfolioOut


class BatchClosing(BaseModel):
    """The last line of an NDJSON batch: the counts and the portfolio summary."""

    succeeded: int
    failed: int
    not_run: int
    summary: PortfolioOut
