"""The sequence that chooses the deterministic terms, on series whose answer is known."""

from __future__ import annotations

import numpy as np
from scipy.signal import lfilter

from service.core.applicability import NotApplicable
from service.core.diagnostics.stationarity import adf_test
from service.core.diagnostics.unit_root import UnitRootDecision, decide


def _decide(x: np.ndarray, period: int = 1) -> UnitRootDecision:
    out = decide(x, period, adf_test(x, "c"), adf_test(x, "ct"))
    assert isinstance(out, UnitRootDecision)
    return out


def _ar1(rng: np.random.Generator, n: int, phi: float) -> np.ndarray:
    shocks = rng.normal(size=n)
    first = shocks[:1] / np.sqrt(1 - phi**2)
    return np.concatenate([first, lfilter([1.0], [1.0, -phi], shocks[1:], zi=phi * first)[0]])


def test_a_trending_stationary_series_stops_at_the_first_step() -> None:
    d = _decide(0.3 * np.arange(120) + _ar1(np.random.default_rng(1), 120, 0.5))
    assert not d.unit_root and d.terms == "ct" and d.trending
    assert d.verdict == "trend_stationary"
    assert [s.answer.split(":")[0] for s in d.steps] == ["rejected", "yes"]


def test_a_drifting_random_walk_keeps_its_unit_root_with_the_trend_test() -> None:
    d = _decide(np.cumsum(1.0 + np.random.default_rng(2).normal(size=200)))
    assert d.unit_root and d.terms == "ct" and d.trending
    assert d.steps[1].question == "does the unit-root process drift?"
    assert d.kind == "weighted_symmetric"


def test_a_random_walk_without_drift_goes_to_the_constant_only_test() -> None:
    d = _decide(np.cumsum(np.random.default_rng(3).normal(size=200)))
    assert d.unit_root and d.terms == "c" and not d.trending
    assert len(d.steps) == 3 and d.verdict == "difference_stationary"


def test_autocorrelated_differences_use_the_reported_adf_test() -> None:
    x = np.cumsum(_ar1(np.random.default_rng(4), 300, 0.7))
    d = _decide(x)
    assert d.kind == "augmented_dickey_fuller" and d.unit_root
    reported = adf_test(x, "ct")
    assert not isinstance(reported, NotApplicable)
    assert d.steps[0].statistic == reported.statistic


def test_a_fixed_season_is_removed_before_the_tests() -> None:
    rng = np.random.default_rng(5)
    x = 20 * np.sin(2 * np.pi * np.arange(120) / 12) + rng.normal(size=120)
    d = _decide(x, 12)
    assert "seasonal dummies" in d.steps[0].answer
    assert d.verdict == "stationary"


def test_too_short_or_straight_series_get_a_reason() -> None:
    short = np.cumsum(np.random.default_rng(6).normal(size=15))
    assert isinstance(decide(short, 1, adf_test(short, "c"), adf_test(short, "ct")), NotApplicable)
    line = np.arange(50.0)
    assert isinstance(decide(line, 1, adf_test(line, "c"), adf_test(line, "ct")), NotApplicable)


def test_the_fast_f_and_t_tests_agree_with_scipy() -> None:
    from scipy import stats

    from service.core.diagnostics.deterministic import mean_test, one_way_f

    rng = np.random.default_rng(8)
    values = rng.normal(size=301) + 0.1
    groups = np.arange(301) % 12
    found = one_way_f(values, groups, 12)
    assert found is not None
    reference = stats.f_oneway(*[values[groups == k] for k in range(12)])
    np.testing.assert_allclose(found, (reference.statistic, reference.pvalue), rtol=1e-10)
    t = stats.ttest_1samp(values, 0.0)
    np.testing.assert_allclose(mean_test(values), (t.statistic, t.pvalue), rtol=1e-10)
