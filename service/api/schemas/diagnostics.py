"""POST /v1/diagnostics: request and response."""

from __future__ import annotations

from typing import Literal

from pydantic import Field

from service.api.schemas.common import (
    Lag,
    LjungBoxOut,
    NotApplicableOut,
    Out,
    SeriesIn,
    Sparse,
    Strict,
    WarningOut,
)


class DiagnosticsRequest(Strict):
    """A series and how deep to look."""

    series: SeriesIn
    max_lag: Lag | None = Field(
        None, description="Last lag of the ACF/PACF; default min(max(10, 2m), n/4)."
    )
    include: list[Literal["components"]] = Field(
        default_factory=list,
        description="`components` adds the STL trend, seasonal and remainder series.",
    )


class SummaryOut(Out):
    """Counts, span and moments of the observed values."""

    length: int
    missing: int
    first_timestamp: str | None
    last_timestamp: str | None
    frequency: str
    seasonal_period: int
    mean: float | None
    standard_deviation: float | None
    minimum: float | None
    maximum: float | None
    share_of_zeros: float | None


class HypothesisTestOut(Out):
    """One ADF or KPSS test: statistic, p-value (or a bound past the table), critical values."""

    applicable: Literal[True]
    test: Literal["adf", "kpss"]
    deterministic_terms: Literal["constant", "constant_and_trend"]
    null_hypothesis: Literal["unit root", "stationary"]
    statistic: float | None
    p_value: float | None
    p_value_bound: str | None = Field(description="'< 0.01' or '> 0.1' past the table.")
    critical_values: dict[str, float | None]
    observations: int
    lags_used: int
    lag_rule: str
    rejects_null_at_5_percent: bool


TestOrNot = HypothesisTestOut | NotApplicableOut


class ProcedureStepOut(Out):
    """One step of the unit-root procedure: the question, the test and the answer."""

    question: str
    test: str
    statistic: float | None
    critical_value: float | None
    p_value: float | None
    answer: str


class PowerOut(Out):
    """What a series of this length can tell apart from a random walk, and how we know."""

    observations: int
    smallest_distinguishable_root: float | None
    largest_distinguishable_coefficient: float | None
    half_life_steps: float | None = Field(
        description="Steps a series with that coefficient takes to close half of a gap."
    )
    definition: str
    source: str


class UnitRootProcedureOut(Out):
    """The sequential unit-root procedure: deterministic terms chosen on evidence."""

    procedure: str
    steps: list[ProcedureStepOut]
    unit_root: bool
    deterministic_terms: Literal["constant", "constant_and_trend"]
    trend_or_drift: bool
    estimated_coefficient: float | None
    power: PowerOut


class StationarityOut(Out):
    """ADF (constant; constant and trend), KPSS (level; trend) and the procedure's verdict."""

    adf_constant: TestOrNot
    adf_constant_and_trend: TestOrNot
    kpss_level: TestOrNot
    kpss_trend: TestOrNot
    verdict: Literal[
        "stationary",
        "trend_stationary",
        "difference_stationary",
        "seasonal_difference_stationary",
        "inconclusive",
        "not_applicable",
    ]
    decision_rule: str
    unit_root_procedure: UnitRootProcedureOut | NotApplicableOut | None
    notes: list[str]


class DifferencingStepOut(Out):
    """One decision of the differencing search."""

    series: str
    measure: str
    value: float | None
    p_value: float | None
    p_value_bound: str | None
    decision: str


class DifferencingOut(Out):
    """d and D with the steps that chose them and the tests on the differenced series."""

    regular_differences: int
    seasonal_differences: int
    seasonal_period: int
    regular_rule: str
    seasonal_rule: str
    steps: list[DifferencingStepOut]
    differenced_series: str
    adf_constant_after: TestOrNot
    kpss_level_after: TestOrNot
    stationary_after: bool | None
    notes: list[str]


class BandOut(Out):
    """The white-noise band of the ACF and PACF."""

    lower: float
    upper: float
    rule: str


class CorrelogramOut(Out):
    """ACF and PACF at lags 1..max_lag (``acf[i]`` is lag ``i + 1``), band, Ljung-Box."""

    applicable: Literal[True]
    observations: int
    max_lag: int
    lags: list[int]
    acf: list[float | None]
    pacf: list[float | None]
    band: BandOut
    significant_acf_lags: list[int]
    significant_pacf_lags: list[int]
    ljung_box: list[LjungBoxOut]
    notes: list[str]


class DifferencedCorrelogramOut(CorrelogramOut):
    """The correlogram of the differenced series, naming the differences taken."""

    differenced_series: str


class DifferencedNotApplicableOut(NotApplicableOut):
    """No correlogram of the differenced series, naming the differences taken."""

    differenced_series: str


class AutocorrelationOut(Out):
    """Correlograms of the series and of its differenced form."""

    series: CorrelogramOut | NotApplicableOut
    differenced: DifferencedCorrelogramOut | DifferencedNotApplicableOut


class DriftOut(Out):
    """One-sample t-test of the mean difference against zero."""

    mean: float | None
    t_statistic: float | None
    p_value: float | None
    degrees_of_freedom: int


class RandomWalkEvidenceOut(Sparse):
    """The tests the verdict rests on (absent for a straight line)."""

    observations: int | None = None
    ljung_box_differences: LjungBoxOut | None = None
    mean_difference: DriftOut | None = None
    unit_root: UnitRootProcedureOut | None = None
    ljung_box_seasonal_differences: LjungBoxOut | None = None
    mean_seasonal_difference: DriftOut | None = None
    seasonal_lag_autocorrelation: float | None = None


class RandomWalkOut(Out):
    """Is forecasting this series worth more than its last value? The graded verdict."""

    applicable: Literal[True]
    verdict: Literal[
        "random_walk", "behaves_like_random_walk", "seasonal_random_walk", "not_random_walk"
    ]
    is_random_walk: bool = Field(description="random_walk or behaves_like_random_walk.")
    is_seasonal_random_walk: bool
    with_drift: bool
    forecast_to_beat: Literal["naive", "drift", "seasonal_naive"] | None = Field(
        description="The benchmark no model is expected to beat by much, when there is one."
    )
    differences_to_stationarity: int | None
    reason: str
    rule: str
    tolerated_lags: list[int]
    evidence: RandomWalkEvidenceOut


class CandidatePeriodOut(Out):
    """A period suggested by the data, with the ACF and periodogram evidence."""

    period: int
    found_by: str
    autocorrelation: float | None
    share_of_variance: float | None


class ComponentsOut(Out):
    """The decomposition's series, one value per timestamp (for plotting)."""

    method: str
    timestamps: list[str]
    trend: list[float | None]
    seasonal: list[float | None] | None
    remainder: list[float | None]


class PeriodStrengthOut(Out):
    """One seasonal period's MSTL strength."""

    period: float
    decomposed_as: int = Field(description="The whole number of steps MSTL used.")
    strength: float | None
    matters: bool = Field(description="Strength at or above the threshold.")


class SeveralPeriodsOut(Out):
    """Several seasonal periods decomposed at once by MSTL."""

    decomposition: Literal["mstl"]
    strength_rule: str
    threshold: float
    periods: list[PeriodStrengthOut]
    periods_that_matter: list[float]
    trend_strength: float | None
    left_out: list[str] = Field(description="Periods without two full cycles of history.")


class SeasonalityOut(Out):
    """Strengths of trend and season, candidate periods and (on request) the components."""

    applicable: Literal[True]
    decomposition: Literal["stl", "lowess"]
    settings: dict[str, int | float] = Field(description="The decomposition's smoothing settings.")
    strength_rule: str
    trend_strength: float | None
    seasonal_strength: float | NotApplicableOut | None
    seasonal_period_from_frequency: int
    candidate_periods: list[CandidatePeriodOut]
    components: ComponentsOut | None
    several_periods: SeveralPeriodsOut | None = Field(
        None, description="With two or more seasonal periods: MSTL strength of each."
    )


class OutlierOut(Out):
    """One observed point whose remainder lies beyond the robust threshold."""

    timestamp: str
    value: float | None
    remainder: float | None
    score: float | None = Field(description="|r - median(r)| in robust standard deviations.")


class OutliersOut(Out):
    """The points beyond the threshold (the first 100 listed) and the rule used."""

    applicable: Literal[True]
    rule: str
    threshold: float | None
    count: int
    listed: int
    points: list[OutlierOut]
    note: str


class DiagnosticsResponse(Out):
    """Every section of the diagnostics, each a result or ``{"applicable": false, ...}``."""

    summary: SummaryOut
    stationarity: StationarityOut | NotApplicableOut
    differencing: DifferencingOut | NotApplicableOut
    autocorrelation: AutocorrelationOut
    random_walk: RandomWalkOut | NotApplicableOut
    seasonality: SeasonalityOut | NotApplicableOut
    outliers: OutliersOut | NotApplicableOut
    findings: list[str] = Field(description="Plain sentences a report can show as they are.")
    notes: list[str]
    warnings: list[WarningOut]
    data_hash: str
