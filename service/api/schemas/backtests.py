"""POST /v1/backtests: request (the response is documented by example)."""

from __future__ import annotations

from typing import Annotated, Literal

from pydantic import Field

from service.api.schemas.common import (
    OriginCount,
    OriginStep,
    PositiveWhole,
    SeriesIn,
    SpecificationObject,
    Strict,
)


class BacktestRequest(Strict):
    """A series, the specifications to compare (or `auto`) and the rolling origins."""

    series: SeriesIn
    models: Literal["auto"] | Annotated[list[SpecificationObject], Field(max_length=20)] = Field(
        "auto",
        description="Specifications to evaluate, or `auto` for the candidates "
        "automatic selection would try.",
    )
    horizon: PositiveWhole = Field(description="Steps ahead evaluated at each origin.")
    origins: OriginCount = Field(3, description="How many forecast origins.")
    step: OriginStep = Field(1, description="Observations between successive origins.")
    coverage: list[float] = Field(default_factory=lambda: [0.8, 0.95], min_length=1, max_length=10)
    metric: Literal["mase", "smape", "rmse", "mae"] = Field(
        "mase", description="The score that ranks the models."
    )
