"""Is the series a random walk? The classical procedure, with its evidence and reason.

Difference until the ADF test (constant) rejects a unit root, at most twice; a series that
is stationary at level is not a random walk. Otherwise the first differences must behave like
white noise: Ljung-Box does not reject at 5 %, and the ACF has no more lags outside the band
than chance explains (about one in twenty), none of them adjacent. A drift is a mean of the
differences significantly different from zero by a one-sample t-test.
"""

from __future__ import annotations

import itertools
from dataclasses import dataclass
from typing import Any

import numpy as np
from scipy import stats

from service.core.applicability import NotApplicable, plain_float
from service.core.diagnostics.autocorrelation import (
    Correlogram,
    correlogram,
    default_max_lag,
    ljung_box,
    primary_ljung_box_lag,
)
from service.core.diagnostics.stationarity import LEVEL, HypothesisTest, adf_test

RULE = (
    "difference until ADF (constant) rejects a unit root at 5 % (at most twice); a random walk "
    "needs exactly one difference whose ACF is white noise: Ljung-Box p >= 0.05 at lag 10 "
    "(2m when seasonal, at most n/5), and of the first L ACF lags no more outside "
    "±1.959964/√n than the 95th percentile of Binomial(L, 0.05), none adjacent; with drift "
    "when a t-test finds the mean difference non-zero at 5 %"
)


@dataclass(frozen=True)
class RandomWalkVerdict:
    """The verdict, the evidence it rests on and a one-sentence reason."""

    is_random_walk: bool
    with_drift: bool
    differences: int | None
    reason: str
    evidence: dict[str, Any]
    tolerated_lags: tuple[int, ...]

    def to_dict(self) -> dict[str, Any]:
        """The wire form."""
        return {
            "applicable": True,
            "is_random_walk": self.is_random_walk,
            "with_drift": self.with_drift,
            "differences_to_stationarity": self.differences,
            "reason": self.reason,
            "rule": RULE,
            "tolerated_lags": list(self.tolerated_lags),
            "evidence": self.evidence,
        }


def chance_allowance(lags: int) -> int:
    """How many of L white-noise ACF estimates may fall outside a 5 % band by chance.

    The 95th percentile of Binomial(L, 0.05): expected about one in twenty, and more than
    this happens by chance less than one time in twenty.
    """
    return int(stats.binom.ppf(0.95, lags, 0.05))


def isolated(lags: tuple[int, ...]) -> bool:
    """Whether no two of the lags are adjacent."""
    return all(b - a > 1 for a, b in itertools.pairwise(lags))


def random_walk(
    x: np.ndarray, seasonal_period: int, level: HypothesisTest | NotApplicable | None = None
) -> RandomWalkVerdict | NotApplicable:
    """The random-walk verdict of a gap-free series (``level``: its ADF test, if already run)."""
    if x.size > 2 and not np.any(np.diff(x) != x[1] - x[0]):
        return RandomWalkVerdict(
            False,
            False,
            None,
            "The differences are constant: the series is a deterministic straight line.",
            {},
            (),
        )
    level = adf_test(x, "c") if level is None else level
    if isinstance(level, NotApplicable):
        return level
    evidence: dict[str, Any] = {"adf_level": _adf_evidence(level)}
    if level.rejects:
        return RandomWalkVerdict(
            False,
            False,
            0,
            "ADF rejects a unit root at level: the series is stationary, not a random walk.",
            evidence,
            (),
        )
    steps = np.diff(x)
    first = adf_test(steps, "c")
    if isinstance(first, NotApplicable):
        return NotApplicable(f"the differenced series cannot be tested: {first.reason}")
    evidence["adf_differences"] = _adf_evidence(first)
    if not first.rejects:
        return RandomWalkVerdict(
            False,
            False,
            2,
            "ADF does not reject a unit root even in the first differences: the series is "
            "integrated of order two, not a random walk.",
            evidence,
            (),
        )
    return _judge_differences(steps, seasonal_period, evidence)


def _judge_differences(
    steps: np.ndarray, seasonal_period: int, evidence: dict[str, Any]
) -> RandomWalkVerdict | NotApplicable:
    """White-noise check and drift test on the first differences."""
    n = steps.size
    acf = correlogram(steps, max(1, default_max_lag(n, seasonal_period)), seasonal_period)
    if not isinstance(acf, Correlogram):
        return NotApplicable(f"the differences' autocorrelations are not available: {acf.reason}")
    box = ljung_box(acf.acf, n, min(primary_ljung_box_lag(n, seasonal_period), acf.max_lag))
    significant = acf.significant_acf_lags
    allowance = chance_allowance(acf.max_lag)
    by_chance = len(significant) <= allowance and isolated(significant)
    white = box.p_value >= LEVEL and by_chance
    drift = _drift(steps)
    evidence["ljung_box_differences"] = box.to_dict()
    evidence["significant_acf_lags_of_differences"] = list(significant)
    evidence["acf_lags_examined"] = acf.max_lag
    evidence["chance_allowance"] = allowance
    evidence["mean_difference"] = drift
    if not white:
        why = (
            f"Ljung-Box rejects white noise (p = {box.p_value:.3g} at lag {box.lag})"
            if box.p_value < LEVEL
            else f"{len(significant)} ACF lags lie outside the band ({_lags(significant)})"
        )
        return RandomWalkVerdict(
            False,
            False,
            1,
            f"The differences are autocorrelated ({why}): the series is not a random walk and "
            "a model can exploit that structure.",
            evidence,
            (),
        )
    with_drift = bool(drift["p_value"] is not None and drift["p_value"] < LEVEL)
    kind = "a random walk with drift" if with_drift else "a random walk"
    tolerated = significant
    reason = f"The differences behave like white noise: the series is {kind}."
    if tolerated:
        reason = (
            f"The differences behave like white noise apart from isolated lag(s) "
            f"{_lags(tolerated)}, which chance explains at 5 %: the series is {kind}."
        )
    return RandomWalkVerdict(True, with_drift, 1, reason, evidence, tolerated)


def _drift(steps: np.ndarray) -> dict[str, Any]:
    """One-sample t-test of the mean difference against zero."""
    result = stats.ttest_1samp(steps, 0.0)
    return {
        "mean": plain_float(float(np.mean(steps))),
        "t_statistic": plain_float(float(result.statistic)),
        "p_value": plain_float(float(result.pvalue)),
        "degrees_of_freedom": int(steps.size - 1),
    }


def _adf_evidence(test: HypothesisTest) -> dict[str, Any]:
    return {
        "statistic": plain_float(test.statistic),
        "p_value": plain_float(test.p_value),
        "lags_used": test.lags_used,
        "rejects_unit_root_at_5_percent": test.rejects,
    }


def _lags(lags: tuple[int, ...]) -> str:
    return ", ".join(map(str, lags)) if lags else "none"
