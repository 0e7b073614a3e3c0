"""POST /v1/forecasts: request and response."""

from __future__ import annotations

from typing import Any, Literal

from pydantic import BaseModel, ConfigDict, Field

from service.api.schemas.common import (
    LjungBoxOut,
    Out,
    PositiveWhole,
    Provenance,
    SeriesIn,
    Sparse,
    SpecificationJson,
    SpecificationObject,
    Strict,
    WarningOut,
)
from service.api.schemas.selection import SelectionOut

# Beyond a few units the Box-Cox back-transform overflows float64 (-50 gave infinite bounds).
LAMBDA_BOUND = 5.0


class RegressorIn(Strict):
    """An external variable for ARIMA: values aligned to the series and for the horizon."""

    name: str = Field(max_length=100)
    history: list[Any] = Field(description="One value per series timestamp.")
    future: list[Any] | None = Field(None, description="One value per forecast step.")


class TransformIn(Strict):
    """A variance-stabilising transform applied before fitting and undone after."""

    model_config = ConfigDict(extra="forbid", populate_by_name=True)

    kind: Literal["none", "log", "boxcox"] = "none"
    lambda_: float | None = Field(
        None,
        alias="lambda",
        ge=-LAMBDA_BOUND,
        le=LAMBDA_BOUND,
        description="Box-Cox lambda; estimated by maximum likelihood when absent.",
    )
    bias_adjusted: bool = Field(
        True, description="Back-transform to the mean (true) or to the median (false)."
    )


class ForecastRequest(Strict):
    """A series, how far ahead, which interval levels, and which model."""

    series: SeriesIn
    horizon: PositiveWhole = Field(description="Steps ahead to forecast.")
    coverage: list[float] = Field(
        default_factory=lambda: [0.8, 0.95],
        min_length=1,
        max_length=10,
        description="Central prediction-interval levels, each strictly between 0 and 1.",
    )
    model: Literal["auto"] | SpecificationObject = Field(
        "auto", description='`auto`, or a specification such as {"family": "naive"}.'
    )
    candidates: list[SpecificationObject] | None = Field(
        None, max_length=20, description="With `auto`: the specifications to choose among."
    )
    transform: Literal["none", "log", "boxcox"] | TransformIn = "none"
    regressors: list[RegressorIn] | None = Field(None, max_length=20)
    include: list[Literal["fitted", "residuals"]] = Field(default_factory=list)
    metric: Literal["mase", "smape", "rmse"] = Field(
        "mase", description="With `auto`: the backtest score that ranks candidates."
    )


class IntervalOut(BaseModel):
    """The bounds at one coverage level."""

    coverage: float
    lower: list[float]
    upper: list[float]


class ResidualDiagnosticsOut(Sparse):
    """Checks on the fitted model's residuals and notes on how its intervals are made."""

    ljung_box: LjungBoxOut | None = None
    reason: str | None = Field(None, description="Why the Ljung-Box test was not run.")
    interval_method: str | None = None
    initial_states: str | None = None
    members: list[str] | None = Field(None, description="A combination's member labels.")
    scale: Literal["transformed"] | None = Field(
        None, description="Present when the checks ran on the transformed scale."
    )


class ModelOut(Out):
    """The fitted model's metadata."""

    family: str
    label: str
    specification: SpecificationJson
    parameters: dict[str, float | None]
    information_criteria: dict[str, float]
    residual_variance: float | None = None
    residual_diagnostics: ResidualDiagnosticsOut
    observations: int
    fit_seconds: float


class ForecastResponse(BaseModel):
    """Point forecasts with intervals, the model used, how it was chosen, and provenance."""

    name: str | None = None
    timestamps: list[str]
    point: list[float]
    intervals: list[IntervalOut]
    model: ModelOut
    selection: SelectionOut | None = None
    warnings: list[WarningOut] = []
    fitted: list[float | None] | None = None
    residuals: list[float | None] | None = None
    provenance: Provenance
