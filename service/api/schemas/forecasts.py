"""POST /v1/forecasts: request and response."""

from __future__ import annotations

from typing import Annotated, Any, Literal

from pydantic import BaseModel, Discriminator, Field, Tag, model_validator

from service.api.schemas.common import (
    CoverageLevels,
    FamilyName,
    LjungBoxOut,
    Out,
    PositiveWhole,
    Provenance,
    RankingMetric,
    SeriesIn,
    Sparse,
    SpecificationJson,
    SpecificationObject,
    Strict,
    WarningOut,
)
from service.api.schemas.selection import SelectionOut

# Beyond a few units the Box-Cox back-transform overflows float64 (-50 gave infinite bounds).
POWER_BOUND = 5.0


class RegressorIn(Strict):
    """An external variable for ARIMA: values aligned to the series and for the horizon."""

    name: str = Field(max_length=100)
    history: list[Any] = Field(description="One value per series timestamp.")
    future: list[Any] | None = Field(None, description="One value per forecast step.")


RENAMED_TRANSFORM_OPTIONS = {"lambda": "power", "bias_adjusted": "back_transform"}
"""Former transform option names; a request that still uses one gets a 422 naming the new one."""


class TransformIn(Strict):
    """A variance-stabilising transform applied before fitting and undone after."""

    kind: Literal["none", "log", "boxcox"] = "none"
    power: float | None = Field(
        None,
        ge=-POWER_BOUND,
        le=POWER_BOUND,
        description="The Box-Cox exponent (0 is the log); estimated by maximum likelihood "
        "when absent.",
    )
    back_transform: Literal["mean", "median"] = Field(
        "mean",
        description="The point forecast on the original scale: the mean (bias-adjusted) or "
        "the median (the plain inverse).",
    )

    @model_validator(mode="before")
    @classmethod
    def _renamed(cls, data: Any) -> Any:
        """Former option names are refused with the name that replaced them."""
        if isinstance(data, dict):
            for old, new in RENAMED_TRANSFORM_OPTIONS.items():
                if old in data:
                    raise ValueError(f"{old!r} is not an option; use transform.{new}")
        return data


def _transform_shape(value: Any) -> str:
    return "Name" if isinstance(value, str) else "Options"


# A name or an object: only the branch that fits the input's shape reports errors (the tags
# are capitalised so that problem fields leave them out, as for other union branches).
TransformField = Annotated[
    Annotated[Literal["none", "log", "boxcox"], Tag("Name")]
    | Annotated[TransformIn, Tag("Options")],
    Discriminator(_transform_shape),
]


class ForecastRequest(Strict):
    """A series, how far ahead, which interval levels, and which model."""

    series: SeriesIn
    horizon: PositiveWhole = Field(description="Steps ahead to forecast.")
    coverage: CoverageLevels = Field(
        default_factory=lambda: [0.8, 0.95],
        min_length=1,
        max_length=10,
        description="Central prediction-interval levels, each strictly between 0 and 1.",
    )
    model: FamilyName | SpecificationObject = Field(
        "auto",
        description='`auto`, a specification such as {"family": "naive"}, or a family name '
        'alone ("naive") for its defaults.',
    )
    candidates: list[FamilyName | SpecificationObject] | None = Field(
        None, max_length=20, description="With `auto`: the specifications to choose among."
    )
    transform: TransformField = "none"
    regressors: list[RegressorIn] | None = Field(None, max_length=20)
    include: list[Literal["fitted", "residuals"]] = Field(default_factory=list)
    metric: RankingMetric = Field(
        "mase", description="With `auto`: the backtest score that ranks candidates."
    )
    lower_bound: float | None = Field(
        None,
        description="Points and interval limits below this are raised to it (censoring). "
        "Left out: 0 when every observed value is >= 0, none otherwise; null: no bound "
        "(Croston's method keeps its floor at 0 either way).",
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


class LowerBoundOut(BaseModel):
    """The lower bound applied to the forecast."""

    value: float
    method: str = Field(description="How the bound is applied.")
    reason: str = Field(description="Why this bound: the history, the request or the family.")
    raised: int = Field(description="How many points and interval limits were raised to it.")


class ForecastResponse(BaseModel):
    """Point forecasts with intervals, the model used, how it was chosen, and provenance."""

    name: str | None = None
    frequency: str | None = Field(
        None,
        description="The series' step in its canonical spelling (`M` is answered as `ME`, "
        "`H` as `h`); an ISO 8601 duration for a month step off the month's start or end.",
    )
    timestamps: list[str]
    point: list[float]
    intervals: list[IntervalOut]
    model: ModelOut
    summary: str = Field(
        description="One plain sentence: is the series forecastable, by how much the forecast "
        "beat the naive one in backtests, and how often its intervals covered past values."
    )
    selection: SelectionOut | None = None
    lower_bound: LowerBoundOut | None = Field(
        None, description="The bound the forecast respects and how; null when there is none."
    )
    warnings: list[WarningOut] = []
    fitted: list[float | None] | None = None
    residuals: list[float | None] | None = None
    provenance: Provenance
