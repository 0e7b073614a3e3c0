"""ADF as statsmodels computes it, KPSS by its definition, their bounds and the verdict."""

from __future__ import annotations

import numpy as np
import pytest
from statsmodels.tsa.stattools import adfuller

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


def _kpss_by_definition(y: np.ndarray, regression: str, lags: int) -> float:
    """KPSS (1992) eq. 11 over the Newey-West long-run variance, written out term by term."""
    t = np.arange(y.size, dtype=float)
    terms = np.column_stack([np.ones_like(t), t]) if regression == "ct" else np.ones((y.size, 1))
    e = y - terms @ np.linalg.lstsq(terms, y, rcond=None)[0]
    long_run = float(e @ e) / y.size
    for lag in range(1, lags + 1):
        long_run += 2.0 * (1.0 - lag / (lags + 1.0)) * float(e[lag:] @ e[:-lag]) / y.size
    return float(np.sum(np.cumsum(e) ** 2)) / (y.size**2 * long_run)


@pytest.mark.parametrize("seed", range(24))
@pytest.mark.parametrize("regression", ["c", "ct"])
def test_kpss_at_our_bandwidth_and_its_bounds(seed: int, regression: str) -> None:
    y = _series(seed)
    ours = kpss_test(y, regression)  # type: ignore[arg-type]
    assert isinstance(ours, HypothesisTest)
    assert ours.lags_used == kpss_lags(y.size)
    np.testing.assert_allclose(
        ours.statistic, _kpss_by_definition(y, regression, kpss_lags(y.size)), rtol=1e-7
    )
    table = [ours.critical_values[k] for k in ("10%", "5%", "2.5%", "1%")]
    if ours.statistic >= table[-1]:
        assert (ours.p_value, ours.p_value_bound) == (None, "< 0.01")
    elif ours.statistic <= table[0]:
        assert (ours.p_value, ours.p_value_bound) == (None, "> 0.10")
    else:
        assert ours.p_value_bound is None
        expected = np.interp(ours.statistic, table, [0.10, 0.05, 0.025, 0.01])
        np.testing.assert_allclose(ours.p_value, expected, rtol=1e-12)


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
