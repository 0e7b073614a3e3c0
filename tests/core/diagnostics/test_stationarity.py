"""ADF and KPSS as statsmodels computes them, their bounds, and the combined verdict."""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from statsmodels.tools.sm_exceptions import InterpolationWarning
from statsmodels.tsa.stattools import adfuller, kpss

from service.api.diagnostics_body import hypothesis_test
from service.core.applicability import NotApplicable
from service.core.diagnostics.stationarity import (
    ADF_LAG_CAP,
    HypothesisTest,
    adf_test,
    kpss_lags,
    kpss_test,
)
from service.core.diagnostics.unit_root import stationarity


def _ar1(rng: np.random.Generator, n: int, phi: float) -> np.ndarray:
    shocks = rng.normal(size=n + 100)
    out = np.zeros(n + 100)
    for t in range(1, n + 100):
        out[t] = phi * out[t - 1] + shocks[t]
    return out[100:]


def _series(seed: int) -> np.ndarray:
    rng = np.random.default_rng(seed)
    n = int(rng.integers(15, 2500))
    kind = seed % 4
    if kind == 0:
        y = rng.normal(size=n) + 0.3 * np.arange(n)
    elif kind == 1:
        y = np.cumsum(rng.normal(size=n))
    elif kind == 2:
        y = _ar1(rng, n, 0.7)
    else:
        y = 5 * np.sin(2 * np.pi * np.arange(n) / 12) + np.cumsum(rng.normal(size=n))
    return y * 1e6 + 1e9 if seed % 5 == 0 else y


@pytest.mark.parametrize("seed", range(24))
@pytest.mark.parametrize("regression", ["c", "ct"])
def test_kpss_matches_statsmodels(seed: int, regression: str) -> None:
    y = _series(seed)
    ours = kpss_test(y, regression)  # type: ignore[arg-type]
    assert isinstance(ours, HypothesisTest)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        theirs = kpss(y, regression, nlags=kpss_lags(y.size), result_object=True)
    np.testing.assert_allclose(ours.statistic, theirs.statistic, rtol=1e-9)
    clipped = any(issubclass(w.category, InterpolationWarning) for w in caught)
    if clipped:
        assert ours.p_value is None
        assert ours.p_value_bound == ("< 0.01" if theirs.pvalue == 0.01 else "> 0.10")
    else:
        assert ours.p_value_bound is None
        np.testing.assert_allclose(ours.p_value, theirs.pvalue, rtol=1e-12)


def test_adf_caps_the_lag_search_on_long_series() -> None:
    y = np.cumsum(np.random.default_rng(3).normal(size=5000))
    ours = adf_test(y, "c")
    assert isinstance(ours, HypothesisTest)
    theirs = adfuller(y, regression="c", maxlag=ADF_LAG_CAP, result_object=True)
    assert ours.lags_used == theirs.lags
    np.testing.assert_allclose(ours.statistic, theirs.statistic, rtol=1e-8)


def test_random_walk_kpss_gives_a_lower_bound() -> None:
    y = np.cumsum(np.random.default_rng(1).normal(size=500))
    result = kpss_test(y, "c")
    assert isinstance(result, HypothesisTest)
    assert result.p_value is None and result.p_value_bound == "< 0.01"
    assert result.rejects
    wire = hypothesis_test(result)
    assert wire["p_value"] is None and wire["p_value_bound"] == "< 0.01"


@pytest.mark.parametrize("values", [np.full(50, 3.0), np.arange(5.0)])
def test_constant_or_short_series_are_not_applicable(values: np.ndarray) -> None:
    for result in (adf_test(values, "c"), kpss_test(values, "ct")):
        assert isinstance(result, NotApplicable)
        assert hypothesis_test(result)["applicable"] is False
    assert stationarity(values).verdict == "not_applicable"


def test_verdicts_of_simulated_series() -> None:
    # Each test errs about 1 time in 20 at 5 %: demand most seeds, not all.
    seeds = range(20)
    ar = [stationarity(_ar1(np.random.default_rng(s), 300, 0.7)).verdict for s in seeds]
    walk = [
        stationarity(np.cumsum(np.random.default_rng(s).normal(size=300))).verdict for s in seeds
    ]
    trend = [
        stationarity(_ar1(np.random.default_rng(s), 300, 0.5) + 0.05 * np.arange(300)).verdict
        for s in seeds
    ]
    assert ar.count("stationary") >= 17
    assert walk.count("difference_stationary") >= 16
    assert trend.count("trend_stationary") >= 16
