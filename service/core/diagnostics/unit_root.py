"""Does the series have a unit root, and with which deterministic terms? One decision for all.

The stationarity verdict, the differencing orders and the random-walk verdict all read the
``UnitRootDecision`` made here, so that one response tells one story.

Deterministic terms are chosen on evidence by the general-to-specific sequence of Dolado,
Jenkinson & Sosvilla-Rivero (1990; from memory):

1. test with a constant and a linear trend; a rejection ends the search (stationary around a
   trend when the trend's t-ratio is significant, around a constant otherwise);
2. otherwise ask whether the unit-root process drifts: a t-test on the mean difference at 5 %
   (standard normal under the unit root; it stands in for the procedure's F-test on the
   trend, which needs the Dickey-Fuller (1981) tables); a drift ends the search: a unit root
   with drift, judged by the test of step 1;
3. otherwise test with a constant only: a rejection means stationary around a constant, no
   rejection a unit root without drift.

Which test: when the first differences are uncorrelated (Ljung-Box at 1 %), the weighted
symmetric coefficient test without lags (``symmetric_test``), the more powerful choice when
nothing needs augmenting; otherwise the augmented Dickey-Fuller t-test reported in the
stationarity section (lags by AIC). Levels: 1 % with the trend and 5 % without. Three looks at
one random-walk hypothesis (trend step, constant step, Ljung-Box) share a 7 % error budget
(Bonferroni), so a true random walk is called one at least 93 times in 100 at any length.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Literal

import numpy as np

from service.core.applicability import NotApplicable
from service.core.diagnostics import symmetric_test
from service.core.diagnostics.autocorrelation import (
    LjungBox,
    ljung_box,
    primary_ljung_box_lag,
    sample_acf,
)
from service.core.diagnostics.deterministic import mean_test, seasonal_adjustment, trend_t_ratio
from service.core.diagnostics.stationarity import (
    HypothesisTest,
    Regression,
    Stationarity,
    adf_test,
    kpss_test,
)

LEVEL_TREND = 0.01
LEVEL_CONSTANT = 0.05
LEVEL_WHITE = 0.01
LEVEL_DRIFT = 0.05
TREND_T = 1.959964
"""Two-sided 5 % normal quantile for the trend's t-ratio in a stationary series."""

PROCEDURE = (
    "Dolado, Jenkinson & Sosvilla-Rivero (1990), general to specific: (1) unit-root test with "
    "constant and trend at 1 %: a rejection ends it, stationary around a trend when the trend's "
    "AR(1)-corrected t-ratio exceeds 1.96, else around a constant; (2) otherwise a t-test at 5 % "
    "on the mean difference: a drift ends it, a unit root with drift; (3) otherwise the test "
    "with a constant only at 5 %. The test is the weighted symmetric coefficient test without "
    "lags when Ljung-Box at 1 % finds the differences uncorrelated, else the augmented "
    "Dickey-Fuller t-test with lags by AIC"
)

Kind = Literal["weighted_symmetric", "augmented_dickey_fuller"]


@dataclass(frozen=True)
class ProcedureStep:
    """One step of the sequence: what it asked, the statistic, its yardstick and the answer."""

    question: str
    test: str
    statistic: float
    critical_value: float | None
    p_value: float | None
    answer: str


@dataclass(frozen=True)
class UnitRootDecision:
    """The sequence's outcome: unit root or not, the terms that decided it, and the evidence."""

    unit_root: bool
    terms: Regression
    trending: bool
    """A significant linear trend (stationary) or drift (unit root)."""
    kind: Kind
    coefficient: float | None
    """The estimated AR(1) coefficient of the deciding test (weighted symmetric test only)."""
    observations: int
    differences_white: LjungBox
    steps: tuple[ProcedureStep, ...]

    @property
    def distinguishable_coefficient(self) -> float:
        """The AR(1) coefficient below which the deciding test catches stationarity 4 in 5."""
        return symmetric_test.distinguishable_coefficient(self.terms, self.observations)

    @property
    def uncorrelated_differences(self) -> bool:
        """Whether Ljung-Box finds no autocorrelation in the first differences at 1 %."""
        return self.differences_white.p_value >= LEVEL_WHITE

    @property
    def verdict(self) -> str:
        """stationary, trend_stationary or difference_stationary."""
        if self.unit_root:
            return "difference_stationary"
        return "trend_stationary" if self.trending else "stationary"


def _percent(level: float) -> str:
    return f"{level * 100:g} %"


def differences_whiteness(x: np.ndarray, seasonal_period: int) -> LjungBox:
    """Ljung-Box on a series at the decision lag (10, or 2m, at most n/5)."""
    n = x.size
    lag = primary_ljung_box_lag(n, seasonal_period)
    return ljung_box(sample_acf(x, lag), n, lag)


def decide(
    x: np.ndarray,
    seasonal_period: int,
    adf_constant: HypothesisTest | NotApplicable | None,
    adf_trend: HypothesisTest | NotApplicable | None,
) -> UnitRootDecision | NotApplicable:
    """Run the sequence on a gap-free, non-constant series (its ADF tests, if already
    computed: the ones the procedure needs and lacks are computed when it reaches them)."""
    n = x.size
    if n < symmetric_test.MIN_LENGTH:
        return NotApplicable(
            f"{n} observations: telling a unit root from a stationary series needs at least "
            f"{symmetric_test.MIN_LENGTH}"
        )
    steps_x = np.diff(x)
    if not np.any(steps_x != steps_x[0]):
        return NotApplicable("the differences are constant: the series is a straight line")
    white = differences_whiteness(steps_x, seasonal_period)
    steps: list[ProcedureStep] = []
    adjusted = seasonal_adjustment(x, seasonal_period)
    if adjusted is not None:
        x, f_statistic, f_p_value = adjusted
        steps_x = np.diff(x)
        adf_constant = adf_trend = None  # those of the series as given do not apply
        steps.append(
            ProcedureStep(
                "does a fixed seasonal pattern need removing first?",
                "F-test of the season's positions in the first differences, 0.1 %",
                f_statistic,
                None,
                f_p_value,
                "yes: seasonal dummies regressed out (Dickey, Bell & Miller 1986)",
            )
        )
    tested = white if adjusted is None else differences_whiteness(steps_x, seasonal_period)
    uncorrelated = tested.p_value >= LEVEL_WHITE
    kind: Kind = "weighted_symmetric" if uncorrelated else "augmented_dickey_fuller"

    trend_test = _unit_root_step(x, "ct", LEVEL_TREND, uncorrelated, adf_trend)
    if isinstance(trend_test, NotApplicable):
        return trend_test
    steps.append(trend_test.step)
    if trend_test.rejects:
        t_ratio = trend_t_ratio(x)
        trending = abs(t_ratio) > TREND_T
        steps.append(
            ProcedureStep(
                "is the linear trend significant in the stationary series?",
                "OLS slope t-ratio with AR(1)-corrected standard error",
                t_ratio,
                TREND_T,
                None,
                "yes: around a trend" if trending else "no: around a constant",
            )
        )
        return UnitRootDecision(
            False, "ct", trending, kind, trend_test.coefficient, n, white, tuple(steps)
        )
    drift_t, drift_p = mean_test(steps_x)
    drifting = bool(drift_p < LEVEL_DRIFT)
    steps.append(
        ProcedureStep(
            "does the unit-root process drift?",
            "t-test of the mean difference against 0",
            drift_t,
            None,
            drift_p,
            "yes: a unit root with drift" if drifting else "no: test with a constant only",
        )
    )
    if drifting:
        return UnitRootDecision(
            True, "ct", True, kind, trend_test.coefficient, n, white, tuple(steps)
        )
    level_test = _unit_root_step(x, "c", LEVEL_CONSTANT, uncorrelated, adf_constant)
    if isinstance(level_test, NotApplicable):
        return level_test
    steps.append(level_test.step)
    return UnitRootDecision(
        not level_test.rejects, "c", False, kind, level_test.coefficient, n, white, tuple(steps)
    )


@dataclass(frozen=True)
class _Outcome:
    rejects: bool
    coefficient: float | None
    step: ProcedureStep


def _unit_root_step(
    x: np.ndarray,
    terms: Regression,
    level: float,
    uncorrelated: bool,
    adf: HypothesisTest | NotApplicable | None,
) -> _Outcome | NotApplicable:
    label = "constant and trend" if terms == "ct" else "constant"
    question = f"unit root? (test with {label}, {_percent(level)})"
    if uncorrelated:
        statistic, rho = symmetric_test.statistic(x, terms)
        critical = symmetric_test.critical_value(terms, level, x.size)
        rejects = statistic < critical
        answer = "rejected: stationary" if rejects else "not rejected"
        step = ProcedureStep(
            question, "weighted symmetric, n(ρ̂ - 1)", statistic, critical, None, answer
        )
        return _Outcome(bool(rejects), rho, step)
    if adf is None:
        adf = adf_test(x, terms)
    if isinstance(adf, NotApplicable):
        return adf
    p_value = adf.p_value if adf.p_value is not None else 0.0
    rejects = p_value < level
    answer = "rejected: stationary" if rejects else "not rejected"
    step = ProcedureStep(
        question,
        f"augmented Dickey-Fuller t, {adf.lags_used} lag(s)",
        adf.statistic,
        None,
        p_value,
        answer,
    )
    return _Outcome(bool(rejects), None, step)


def integration_order(steps: np.ndarray) -> int:
    """1 when ADF (constant) rejects a unit root in the first differences at 5 %, else 2."""
    test = adf_test(steps, "c")
    return 1 if isinstance(test, NotApplicable) or test.rejects else 2


def stationarity(
    x: np.ndarray,
    notes: tuple[str, ...] = (),
    seasonal_period: int = 1,
) -> Stationarity:
    """All four tests on a finite series, the unit-root procedure and its verdict.

    A seasonal random walk is invisible to the regular-unit-root procedure: the caller that
    finds one (``report.diagnose``) replaces the verdict with seasonal_difference_stationary.
    """
    adf_c, adf_ct = adf_test(x, "c"), adf_test(x, "ct")
    kpss_c, kpss_ct = kpss_test(x, "c"), kpss_test(x, "ct")
    if any(isinstance(t, NotApplicable) for t in (adf_c, adf_ct, kpss_c, kpss_ct)):
        return Stationarity(adf_c, adf_ct, kpss_c, kpss_ct, "not_applicable", notes)
    decision = decide(x, seasonal_period, adf_c, adf_ct)
    if isinstance(decision, NotApplicable):
        verdict = "inconclusive"
        notes = (*notes, f"no verdict: {decision.reason}")
    else:
        verdict = decision.verdict
        kpss = kpss_ct if decision.terms == "ct" else kpss_c
        assert isinstance(kpss, HypothesisTest)
        notes = (*notes, *_kpss_note(verdict, kpss))
    return Stationarity(adf_c, adf_ct, kpss_c, kpss_ct, verdict, notes, decision)


def _kpss_note(verdict: str, kpss: HypothesisTest) -> tuple[str, ...]:
    """A note when KPSS, testing the other way round, points the other way."""
    stationary = verdict != "difference_stationary"
    if stationary and kpss.rejects:
        return (
            "KPSS rejects stationarity although the unit-root procedure rejects a unit root: "
            "common for a stationary series that returns to its mean slowly (KPSS with a short "
            "bandwidth over-rejects there); the verdict follows the unit-root procedure",
        )
    if not stationary and not kpss.rejects:
        return (
            "KPSS does not reject stationarity although the unit-root procedure keeps a unit "
            "root: at this length neither test can rule out the other's hypothesis; the "
            "verdict follows the unit-root procedure",
        )
    return ()
