"""The ``selection`` part of an automatic forecast: how the model was chosen, how it scored."""

from __future__ import annotations

from pydantic import Field

from service.api.schemas.backtests import RankEntryOut
from service.api.schemas.common import Out, SpecificationJson


class BacktestPlanOut(Out):
    """The rolling origins the candidates were scored on."""

    horizon: int
    step: int
    origins: list[str]


class LevelCalibrationOut(Out):
    """One coverage level: nominal, measured in the backtest, and the width factor used."""

    coverage: float
    observed_coverage: float | None = Field(
        description="Share of actual values inside the model's own interval in the backtest."
    )
    calibrated_coverage: float | None = Field(
        description="Share of actual values inside the interval as delivered (after the "
        "factor) in the same backtest."
    )
    factor: float | None
    scores: int


class CalibrationOut(Out):
    """Coverage of the intervals in the backtest and, when applied, the widening factors."""

    origins: int
    applied: bool
    reason: str
    levels: list[LevelCalibrationOut]


class CandidateOut(Out):
    """One specification tried, with the reason it was tried."""

    specification: SpecificationJson
    reason: str


class CandidatesOut(Out):
    """The specifications tried and the families left out."""

    candidates: list[CandidateOut]
    skipped: list[str]


class ProfileOut(Out):
    """What the series looked like to the candidate rules."""

    seasonal: bool
    seasonal_period: int
    positive: bool
    zero_share: float
    intermittent: bool
    short: bool
    random_walk: bool
    random_walk_reason: str


class FailureOut(Out):
    """A candidate that could not be evaluated."""

    label: str
    reason: str


class SelectionOut(Out):
    """How `auto` chose: the ranking, the benchmark, the skill over it and the calibration."""

    metric: str
    rule: str
    chosen: str
    ranking: list[RankEntryOut]
    benchmark: str
    skill_over_naive: float | None = Field(
        description="1 - score(chosen) / score(benchmark) in the backtest."
    )
    backtest: BacktestPlanOut
    calibration: CalibrationOut | None
    candidates: CandidatesOut
    profile: ProfileOut
    failures: list[FailureOut]
    observations_used: int
