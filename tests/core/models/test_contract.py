"""The contract every registered family keeps (STYLE.md, "Tests"), one seeded series per case.

Families are taken from the registry at collection time, so families added later (arima,
stl, ...) are checked without editing this file; a family whose default specification
needs parameters gets an example in EXAMPLES.
"""

from __future__ import annotations

import copy
import pickle
from collections.abc import Callable
from typing import Any

import numpy as np
import pandas as pd
import pytest
from numpy.testing import assert_allclose, assert_array_equal
from statsmodels.tsa.exponential_smoothing.ets import ETSModel
from statsmodels.tsa.forecasting.theta import ThetaModel

from service.core.models import registry
from service.core.models.base import Fitted, Forecast

PERIOD = 12
HORIZON = 8
COVERAGE = (0.8, 0.95)

EXAMPLES: dict[str, dict[str, Any]] = {
    "combination": {
        "family": "combination",
        "members": [{"family": "drift"}, {"family": "theta"}],
    },
}


def _cases() -> list[dict[str, Any]]:
    return [EXAMPLES.get(name, {"family": name}) for name in registry.FAMILIES]


def seasonal_series(n: int = 72, seed: int = 17) -> pd.Series:
    rng = np.random.default_rng(seed)
    t = np.arange(n)
    values = 200 + 0.8 * t + 15 * np.sin(2 * np.pi * t / PERIOD) + rng.normal(0, 3, n)
    return pd.Series(values, index=pd.date_range("2018-01-01", periods=n, freq="MS"), name="y")


def intermittent_series(n: int = 72, seed: int = 18) -> pd.Series:
    rng = np.random.default_rng(seed)
    values = np.where(rng.random(n) < 0.3, rng.integers(1, 12, n), 0).astype(float)
    return pd.Series(values, index=pd.date_range("2018-01-01", periods=n, freq="MS"), name="y")


def series_for(case: dict[str, Any]) -> pd.Series:
    return intermittent_series() if case["family"] == "croston" else seasonal_series()


def case_id(case: dict[str, Any]) -> str:
    return str(case["family"])


_FITTED: dict[str, Fitted] = {}


def fitted_for(case: dict[str, Any]) -> Fitted:
    """One fit per case, shared by the checks that do not refit."""
    key = case_id(case)
    if key not in _FITTED:
        spec = registry.specification_from_dict(case)
        _FITTED[key] = spec.fit(series_for(case), PERIOD)
    return _FITTED[key]


def assert_same_forecast(a: Forecast, b: Forecast) -> None:
    assert_array_equal(a.index, b.index)
    assert_allclose(a.point, b.point, rtol=1e-12)
    for x, y in zip(a.intervals, b.intervals, strict=True):
        assert x.coverage == y.coverage
        assert_allclose(x.lower, y.lower, rtol=1e-12)
        assert_allclose(x.upper, y.upper, rtol=1e-12)


CASES = _cases()


@pytest.mark.parametrize("case", CASES, ids=case_id)
def test_two_fits_agree(case: dict[str, Any]) -> None:
    spec = registry.specification_from_dict(case)
    again = spec.fit(series_for(case), PERIOD).forecast(HORIZON, COVERAGE)
    assert_same_forecast(fitted_for(case).forecast(HORIZON, COVERAGE), again)


@pytest.mark.parametrize("case", CASES, ids=case_id)
def test_input_is_not_mutated(case: dict[str, Any]) -> None:
    y = series_for(case)
    before = copy.deepcopy(y)
    fitted = registry.specification_from_dict(case).fit(y, PERIOD)
    fitted.forecast(HORIZON, COVERAGE)
    fitted.describe()
    fitted.refilter(y)
    pd.testing.assert_series_equal(y, before)
    assert y.index.freq == before.index.freq


@pytest.mark.parametrize("case", CASES, ids=case_id)
def test_shape_index_and_ordering(case: dict[str, Any]) -> None:
    y = series_for(case)
    fc = fitted_for(case).forecast(HORIZON, COVERAGE)
    assert fc.point.shape == (HORIZON,)
    assert np.all(np.isfinite(fc.point))
    expected = pd.date_range(y.index[-1] + y.index.freq, periods=HORIZON, freq=y.index.freq)
    assert_array_equal(fc.index, expected)
    assert fc.index.freq == y.index.freq
    assert [i.coverage for i in fc.intervals] == list(COVERAGE)
    for interval in fc.intervals:
        assert interval.lower.shape == interval.upper.shape == (HORIZON,)
        assert np.all(interval.lower <= fc.point + 1e-9)
        assert np.all(fc.point <= interval.upper + 1e-9)
    narrow, wide = fc.intervals
    assert np.all(wide.lower <= narrow.lower + 1e-9)
    assert np.all(narrow.upper <= wide.upper + 1e-9)
    assert np.any(wide.upper - wide.lower > 0)


@pytest.mark.parametrize("case", CASES, ids=case_id)
def test_pickle_round_trip(case: dict[str, Any]) -> None:
    fitted = fitted_for(case)
    first = fitted.forecast(HORIZON, COVERAGE)
    blob = pickle.dumps(fitted)
    assert len(blob) < 200_000  # fitted models are cached: no library results inside
    assert_same_forecast(pickle.loads(blob).forecast(HORIZON, COVERAGE), first)


@pytest.mark.parametrize("case", CASES, ids=case_id)
def test_refilter_on_a_longer_history(case: dict[str, Any]) -> None:
    y = series_for(case)
    short = registry.specification_from_dict(case).fit(y[:-PERIOD], PERIOD)
    longer = short.refilter(y)
    fc = longer.forecast(HORIZON, COVERAGE)
    assert fc.index[0] == y.index[-1] + y.index.freq
    assert np.all(np.isfinite(fc.point))
    fitted = longer.fitted_values()
    assert fitted.index.equals(y.index)
    # Held-fixed parameters: the shared part of the history is fitted exactly as before.
    assert_allclose(
        fitted.to_numpy()[: len(y) - PERIOD], short.fitted_values().to_numpy(), equal_nan=True
    )


@pytest.mark.parametrize("case", CASES, ids=case_id)
def test_describe_and_residuals(case: dict[str, Any]) -> None:
    y = series_for(case)
    fitted = fitted_for(case)
    d = fitted.describe()
    assert d.family == case["family"] and d.label
    assert d.observations == len(y)
    assert all(np.isfinite(v) for v in d.parameters.values())
    resid = fitted.residuals()
    assert resid.index.equals(y.index)
    finite = np.isfinite(resid.to_numpy())
    assert_allclose(
        (fitted.fitted_values() + resid).to_numpy()[finite], y.to_numpy()[finite], rtol=1e-12
    )


def _golden_ets(y: pd.Series, fitted: Any) -> None:
    chosen = fitted.chosen
    kwargs = {
        "error": chosen.error,
        "trend": None if chosen.trend == "none" else chosen.trend,
        "damped_trend": bool(chosen.damped),
        "seasonal": None if chosen.season == "none" else chosen.season,
        "seasonal_periods": PERIOD if chosen.season != "none" else None,
    }
    direct = ETSModel(y.to_numpy(), **kwargs).fit(disp=False)
    ours = fitted.information_criteria()["log_likelihood"]
    assert ours >= direct.llf - 1e-6  # never a worse optimum than statsmodels' own start
    if abs(ours - direct.llf) < 1e-3:
        assert_allclose(
            fitted.forecast(HORIZON, COVERAGE).point, direct.forecast(HORIZON), rtol=1e-3
        )


def _golden_theta(y: pd.Series, fitted: Any) -> None:
    adjusted = len(fitted.seasonal_indices) > 1
    direct = ThetaModel(
        y.to_numpy(), period=PERIOD, deseasonalize=adjusted, use_test=False, method="mul"
    ).fit()
    assert_allclose(fitted.slope, direct.params["b0"], rtol=1e-8)
    assert_allclose(fitted.forecast(HORIZON, COVERAGE).point, direct.forecast(HORIZON), rtol=1e-3)


def _golden_naive(y: pd.Series, fitted: Any) -> None:
    assert_allclose(fitted.forecast(HORIZON, COVERAGE).point, y.iloc[-1])


def _golden_mean(y: pd.Series, fitted: Any) -> None:
    assert_allclose(fitted.forecast(HORIZON, COVERAGE).point, y.mean(), rtol=1e-12)


def _golden_seasonal_naive(y: pd.Series, fitted: Any) -> None:
    expected = y.to_numpy()[-PERIOD:][np.arange(HORIZON) % PERIOD]
    assert_allclose(fitted.forecast(HORIZON, COVERAGE).point, expected)


def _golden_drift(y: pd.Series, fitted: Any) -> None:
    slope = (y.iloc[-1] - y.iloc[0]) / (len(y) - 1)
    expected = y.iloc[-1] + slope * np.arange(1, HORIZON + 1)
    assert_allclose(fitted.forecast(HORIZON, COVERAGE).point, expected, rtol=1e-12)


GOLDEN: dict[str, Callable[[pd.Series, Any], None]] = {
    "ets": _golden_ets,
    "theta": _golden_theta,
    "naive": _golden_naive,
    "mean": _golden_mean,
    "seasonal_naive": _golden_seasonal_naive,
    "drift": _golden_drift,
}


@pytest.mark.parametrize("case", CASES, ids=case_id)
def test_golden_values(case: dict[str, Any]) -> None:
    check = GOLDEN.get(case["family"])
    if check is None:
        pytest.skip(f"no direct reference call for {case['family']} (its own tests cover it)")
    check(series_for(case), fitted_for(case))
