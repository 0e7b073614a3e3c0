"""POST /v1/backtests: request and response."""

from __future__ import annotations

from typing import Annotated, Literal

from pydantic import Field

from service.api.schemas.common import (
    CoverageLevels,
    Estimation,
    FamilyName,
    OriginCount,
    OriginStep,
    Out,
    PositiveWhole,
    RankingMetric,
    SeriesIn,
    SpecificationJson,
    SpecificationObject,
    Strict,
    WarningOut,
)


class BacktestRequest(Strict):
    """A series, the specifications to compare (or `auto`) and the rolling origins."""

    series: SeriesIn
    models: (
        Literal["auto"] | Annotated[list[FamilyName | SpecificationObject], Field(max_length=20)]
    ) = Field(
        "auto",
        description="Specifications to evaluate, or `auto` for the candidates "
        "automatic selection would try.",
    )
    horizon: PositiveWhole = Field(description="Steps ahead evaluated at each origin.")
    origins: OriginCount = Field(3, description="How many forecast origins.")
    step: OriginStep = Field(1, description="Observations between successive origins.")
    coverage: CoverageLevels = Field(
        default_factory=lambda: [0.8, 0.95], min_length=1, max_length=10
    )
    metric: RankingMetric = Field("mase", description="The score that ranks the models.")
    estimation: Estimation = Field(
        "first_origin",
        description="`first_origin`: each model is estimated once, on the data before the "
        "first origin, and its parameters are carried through the later origins (fast); "
        "`every_origin`: estimated again on the data before every origin, as a forecast made "
        "then would be (one fit per origin and model).",
    )


class ScoresOut(Out):
    """Accuracy measures; the observed coverage (share of actual values inside the interval)
    and the interval score per requested coverage level (e.g. "0.8")."""

    mae: float | None
    rmse: float | None
    mase: float | None
    smape: float | None
    observed_coverage: dict[str, float | None] = Field(
        description="Share of actual values inside the interval, per requested level."
    )
    msis: dict[str, float | None] = Field(description="Scaled interval score per level.")


class StepScoresOut(ScoresOut):
    """The scores at one step ahead, over the origins."""

    step: int


class ModelBacktestOut(Out):
    """One specification's backtest: forecast origins, per-step and overall scores."""

    specification: SpecificationJson
    label: str
    failure: str | None = Field(description="Why the model could not be evaluated, if so.")
    origins: list[str]
    overall: ScoresOut | None
    steps: list[StepScoresOut]
    fit_seconds: float
    refilter_seconds: float
    warnings: list[WarningOut]


class RankEntryOut(Out):
    """A model's place in the ranking by the chosen metric."""

    label: str
    specification: SpecificationJson
    score: float | None


class BacktestResponse(Out):
    """Every model's per-step scores and a ranking of the working ones by ``metric``."""

    metric: str
    horizon: int
    step: int
    estimation: Estimation = Field(description="Where each model was estimated, as asked.")
    origins: list[str]
    coverage: list[float]
    models: list[ModelBacktestOut]
    ranking: list[RankEntryOut]
    warnings: list[WarningOut]
    data_hash: str
