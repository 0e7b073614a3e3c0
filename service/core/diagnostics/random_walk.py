"""Is forecasting this series worth more than repeating its last value? The graded verdict.

Read from the unit-root decision (``unit_root``) and the whiteness of the differences:

- ``seasonal_random_walk``: one seasonal difference leaves white noise (Ljung-Box at 1 % up to
  at least lag m) while the first differences do not; the value one season ago (seasonal
  naive) is the forecast to beat;
- ``random_walk``: a unit root, uncorrelated differences, and a series long enough that the
  test would have told a stationary series that matters apart from a random walk: every AR(1)
  coefficient it cannot catch 4 times in 5 is at least CLOSE_TO_ONE;
- ``behaves_like_random_walk``: the same on a shorter series, where a slowly mean-reverting
  series would look the same; or a stationary series so persistent (estimated coefficient at
  least CLOSE_TO_ONE) that the last value is within 5 % of the best one-step forecast;
- ``not_random_walk``: stationary, or autocorrelated differences a model can use.

The naive (or drift, with a drift; seasonal naive for a seasonal random walk) forecast is the
one to beat whenever the verdict is one of the first three.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np

from service.core.applicability import NotApplicable, plain_float
from service.core.diagnostics import symmetric_test
from service.core.diagnostics.autocorrelation import (
    LjungBox,
    ljung_box,
    sample_acf,
    significant_lags,
    white_noise_band,
)
from service.core.diagnostics.deterministic import mean_test
from service.core.diagnostics.unit_root import (
    LEVEL_DRIFT,
    LEVEL_WHITE,
    UnitRootDecision,
    integration_order,
    stationarity,
)

CLOSE_TO_ONE = 0.905
"""AR(1) coefficient from which the naive forecast's one-step mean squared error is within 5 %
of the best forecast's: 2/(1 + φ) <= 1.05, the margin of auto's naive guard."""

RULE = (
    "seasonal_random_walk when the seasonal differences are white noise and the first "
    "differences are not, random_walk when a unit root remains and the first differences are "
    "white noise at 1 % (Ljung & Box 1978) on a series long enough to tell an AR(1) "
    "coefficient of 0.905 from 1, behaves_like_random_walk on a shorter series or when a "
    "stationary series has that coefficient at 0.905 or above, otherwise not_random_walk, "
    "with drift when a t-test finds the mean difference non-zero at 5 %."
)


OVERDIFFERENCED_Z = 2.575829
"""Two-sided 1 % normal quantile: a lag-m autocorrelation of the seasonal differences below
-2.576/√n marks a stable season differenced once too often (the pure case gives -0.5)."""


STRICT_OVERDIFFERENCED_Z = 1.644854
"""One-sided 5 % normal quantile, used when the level already looks stationary."""


@dataclass(frozen=True)
class MeanTest:
    """One-sample t-test of the mean difference against zero (None where not finite)."""

    mean: float | None
    t_statistic: float | None
    p_value: float | None
    degrees_of_freedom: int

    @property
    def drifts(self) -> bool:
        """Whether the mean difference is non-zero at the drift level."""
        return self.p_value is not None and self.p_value < LEVEL_DRIFT


@dataclass(frozen=True)
class SeasonalCheck:
    """Ljung-Box on the seasonal differences, their lag-m autocorrelation and their drift."""

    white: LjungBox
    seasonal_lag_autocorrelation: float
    observations: int
    drift: MeanTest

    @property
    def uncorrelated(self) -> bool:
        """Seasonal differences like white noise: Ljung-Box at 1 % does not reject, and the
        lag-m autocorrelation is not the negative one of a stable season differenced away."""
        floor = -OVERDIFFERENCED_Z / math.sqrt(self.observations)
        return self.white.p_value >= LEVEL_WHITE and self.seasonal_lag_autocorrelation >= floor

    @property
    def clearly_not_overdifferenced(self) -> bool:
        """The lag-m autocorrelation is not negative at 5 % one-sided: the stronger evidence
        asked of a series whose level the unit-root procedure found stationary."""
        floor = -STRICT_OVERDIFFERENCED_Z / math.sqrt(self.observations)
        return self.seasonal_lag_autocorrelation >= floor


@dataclass(frozen=True)
class RandomWalkEvidence:
    """The tests a verdict rests on: whiteness and mean of the first differences, and the
    seasonal-difference check when one was made."""

    observations: int
    differences_white: LjungBox
    mean_difference: MeanTest
    seasonal: SeasonalCheck | None


@dataclass(frozen=True)
class RandomWalkVerdict:
    """The graded verdict, the forecast to beat, the evidence and a plain reason."""

    grade: str
    with_drift: bool
    differences: int | None
    reason: str
    evidence: RandomWalkEvidence | None
    """None for a straight line, which needs no test."""
    tolerated_lags: tuple[int, ...]
    decision: UnitRootDecision | None = None
    """The unit-root decision the verdict read (None for a straight line)."""

    @property
    def is_random_walk(self) -> bool:
        """True for random_walk and behaves_like_random_walk (for model selection)."""
        return self.grade in ("random_walk", "behaves_like_random_walk")

    @property
    def is_seasonal_random_walk(self) -> bool:
        """True when one seasonal difference leaves white noise."""
        return self.grade == "seasonal_random_walk"

    @property
    def forecast_to_beat(self) -> str | None:
        """The benchmark no model is expected to beat by much, or None."""
        if self.is_seasonal_random_walk:
            return "seasonal_naive"
        if self.is_random_walk:
            return "drift" if self.with_drift else "naive"
        return None


def seasonal_check(x: np.ndarray, seasonal_period: int) -> SeasonalCheck | None:
    """The seasonal-difference check, or None when m = 1 or the series is under 6 seasons
    (Ljung-Box at n/5 lags would not reach lag m)."""
    m = seasonal_period
    if m <= 1 or x.size < 6 * m:
        return None
    seasonal = x[m:] - x[:-m]
    if not np.any(seasonal != seasonal[0]):
        return None
    lag = max(m, min(2 * m, seasonal.size // 5))
    acf = sample_acf(seasonal, lag)
    box = ljung_box(acf, seasonal.size, lag)
    return SeasonalCheck(box, float(acf[m - 1]), int(seasonal.size), _drift(seasonal))


def random_walk(x: np.ndarray, seasonal_period: int) -> RandomWalkVerdict | NotApplicable:
    """The verdict of a gap-free series, running the unit-root procedure itself."""
    decision = stationarity(x, (), seasonal_period).procedure
    if decision is None:
        decision = NotApplicable("the unit-root tests do not apply to this series")
    return judge(x, seasonal_period, decision, seasonal_check(x, seasonal_period))


def judge(
    x: np.ndarray,
    seasonal_period: int,
    decision: UnitRootDecision | NotApplicable,
    seasonal: SeasonalCheck | None,
) -> RandomWalkVerdict | NotApplicable:
    """The verdict from the unit-root decision and the seasonal check already made."""
    if x.size > 2 and not np.any(np.diff(x) != x[1] - x[0]):
        return RandomWalkVerdict(
            "not_random_walk",
            False,
            None,
            "The series is a straight line: every step is the same, so it is not a random walk.",
            None,
            (),
        )
    if isinstance(decision, NotApplicable):
        return decision
    return replace(_judged(x, seasonal_period, decision, seasonal), decision=decision)


def _judged(
    x: np.ndarray,
    seasonal_period: int,
    decision: UnitRootDecision,
    seasonal: SeasonalCheck | None,
) -> RandomWalkVerdict:
    steps = np.diff(x)
    evidence = RandomWalkEvidence(int(x.size), decision.differences_white, _drift(steps), seasonal)
    if seasonal is not None:
        stationary_level = not decision.unit_root
        if (
            seasonal.uncorrelated
            and not decision.uncorrelated_differences
            and (not stationary_level or seasonal.clearly_not_overdifferenced)
        ):
            return _seasonal(seasonal, seasonal_period, evidence)
    n = steps.size
    band = white_noise_band(n)
    lag = decision.differences_white.lag
    significant = significant_lags(sample_acf(steps, lag), band)
    if not decision.uncorrelated_differences:
        box = decision.differences_white
        differences = 0 if not decision.unit_root else integration_order(steps)
        return RandomWalkVerdict(
            "not_random_walk",
            False,
            differences,
            f"The step-to-step changes are correlated with each other (Ljung-Box p = "
            f"{box.p_value:.2g} over {box.lag} lags), so the history holds a pattern a model can "
            "use: this is not a random walk.",
            evidence,
            (),
        )
    drift = decision.trending
    return _graded(decision, drift, evidence, significant)


def _graded(
    decision: UnitRootDecision, drift: bool, evidence: RandomWalkEvidence, lags: tuple[int, ...]
) -> RandomWalkVerdict:
    n = decision.observations
    phi = decision.distinguishable_coefficient
    what = "random walk with drift" if drift else "random walk"
    last = "the last value plus the average step" if drift else "the last value"
    anchor = "its trend" if drift else "a mean"
    if decision.unit_root:
        half = _steps(symmetric_test.half_life(phi))
        if phi >= CLOSE_TO_ONE:
            reason = (
                f"This is a {what}: its changes from step to step look like independent noise "
                f"and nothing pulls it back towards {anchor}. With {n} points the tests would "
                f"have noticed a pull strong enough to matter (one that closes half of any gap "
                f"within {half}), so no model is expected to forecast much better than {last}."
            )
            return RandomWalkVerdict("random_walk", drift, 1, reason, evidence, lags)
        reason = (
            f"The series behaves like a {what} over this history: its changes from step to "
            f"step look like independent noise and nothing shows it being pulled back towards "
            f"{anchor}. With only {n} points, though, the tests cannot tell it from a series "
            f"that returns to {anchor} slowly (closing half of any gap in {half} or more); "
            f"either way {last} is as good a forecast as any model at short horizons."
        )
        return RandomWalkVerdict("behaves_like_random_walk", drift, 1, reason, evidence, lags)
    rho = decision.coefficient
    if rho is not None and rho >= CLOSE_TO_ONE:
        half = _steps(symmetric_test.half_life(rho))
        reason = (
            f"The series returns to {anchor}, but so slowly (it closes about "
            f"{(1 - rho) * 100:.0f} % of any gap each step, half of it in about {half}) that "
            f"{last} stays within 5 % of the best forecast one step ahead: it behaves like a "
            f"{what} at short horizons."
        )
        return RandomWalkVerdict("behaves_like_random_walk", drift, 0, reason, evidence, lags)
    where = "its trend" if decision.trending else "its mean"
    reason = (
        f"The series returns to {where}, so it is not a random walk: a model that uses the "
        "pull back towards it forecasts better than the last value."
    )
    return RandomWalkVerdict("not_random_walk", False, 0, reason, evidence, ())


def _steps(half_life: float | None) -> str:
    """'5 steps', or 'many steps' when there is no finite half-life."""
    if half_life is None:
        return "many steps"
    rounded = max(1, round(half_life))
    return f"{rounded} step{'s' if rounded > 1 else ''}"


def _seasonal(check: SeasonalCheck, m: int, evidence: RandomWalkEvidence) -> RandomWalkVerdict:
    drift = check.drift.drifts
    extra = ", moved on by the average yearly change," if drift else ""
    reason = (
        f"Each value is the value one season ({m} steps) earlier plus independent noise: "
        f"this is a seasonal random walk{' with drift' if drift else ''}. The value one season "
        f"ago{extra} (the seasonal naive forecast) is the one to beat."
    )
    return RandomWalkVerdict("seasonal_random_walk", drift, 0, reason, evidence, ())


def _drift(steps: np.ndarray) -> MeanTest:
    """One-sample t-test of the mean difference against zero."""
    statistic, p_value = mean_test(steps)
    return MeanTest(
        plain_float(float(np.mean(steps))),
        plain_float(statistic),
        plain_float(p_value),
        int(steps.size - 1),
    )
