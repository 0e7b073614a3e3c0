"""Theta: drift formula, seasonal adjustment and IMA(1,1) intervals."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from numpy.testing import assert_allclose
from statsmodels.tsa.forecasting.theta import ThetaModel

from service.core.diagnostics.autocorrelation import seasonal_lag_stands_out
from service.core.errors import FitError
from service.core.models.theta import (
    ThetaSpec,
    ols_slope,
    seasonal_indices,
    ses_alpha,
    ses_levels,
)


def seasonal_series(n: int = 72, seed: int = 2) -> pd.Series:
    rng = np.random.default_rng(seed)
    t = np.arange(n)
    values = (100 + 0.5 * t) * (1 + 0.2 * np.sin(2 * np.pi * t / 12)) + rng.normal(0, 1, n)
    return pd.Series(values, index=pd.date_range("2018-01-01", periods=n, freq="MS"))


def test_slope_is_ordinary_least_squares() -> None:
    rng = np.random.default_rng(4)
    y = rng.normal(size=40).cumsum()
    assert_allclose(ols_slope(y), np.polyfit(np.arange(40), y, 1)[0], rtol=1e-12)


def test_alpha_minimises_the_one_step_errors() -> None:
    rng = np.random.default_rng(5)
    y = 10 + 0.3 * rng.normal(size=80).cumsum() + rng.normal(size=80)  # interior optimum
    alpha = ses_alpha(y)
    assert 0.01 < alpha < 0.99

    def sse(a: float) -> float:
        return float(np.sum((y[1:] - ses_levels(y, a)[:-1]) ** 2))

    assert sse(alpha) <= min(sse(alpha * 0.99), sse(min(alpha * 1.01, 1.0))) + 1e-9


def test_point_forecasts_agree_with_statsmodels_thetamodel() -> None:
    # Golden value: ThetaModel point forecasts are right (tests/reference/README.md, trap 4,
    # is about its intervals).
    y = seasonal_series()
    ours = ThetaSpec().fit(y, 12)
    assert ours.label == "theta, seasonally adjusted (period 12)"
    direct = ThetaModel(y.to_numpy(), period=12, method="multiplicative").fit()
    assert_allclose(ours.slope, direct.params["b0"], rtol=1e-6)
    assert_allclose(ours.forecast(12, [0.8]).point, direct.forecast(12), rtol=1e-3)


def test_intervals_use_the_ima_variance() -> None:
    y = seasonal_series()
    fitted = ThetaSpec(seasonal_adjustment="never").fit(y, 12)
    fc = fitted.forecast(5, [0.95])
    h = np.arange(1, 6)
    sd = fitted.sigma() * np.sqrt(1 + (h - 1) * fitted.alpha**2)
    assert_allclose(fc.intervals[0].upper - fc.point, 1.959963984540054 * sd, rtol=1e-9)


def test_seasonality_test_and_indices() -> None:
    y = seasonal_series().to_numpy()
    assert seasonal_lag_stands_out(y, 12)
    rng = np.random.default_rng(1)
    assert not seasonal_lag_stands_out(100 + rng.normal(size=72), 12)
    indices = seasonal_indices(y, 12, "multiplicative")
    assert_allclose(np.mean(indices), 1.0, rtol=1e-12)
    assert indices[3] > 1.1 and indices[9] < 0.9  # the peak and trough of the sine


def test_always_adjust_needs_two_seasons() -> None:
    with pytest.raises(FitError) as err:
        ThetaSpec(seasonal_adjustment="always").fit(seasonal_series().iloc[:20], 12)
    assert err.value.problems[0].field == "model.seasonal_adjustment"


def test_values_at_or_below_zero_keep_their_season_by_additive_adjustment() -> None:
    # A series through zero: ratios to the trend mean nothing, differences still do.
    positive = seasonal_series()
    shifted = positive - float(positive.mean())
    fitted = ThetaSpec().fit(shifted, 12)
    assert fitted.seasonal_kind == "additive" and fitted.label.endswith("additive)")
    assert_allclose(np.sum(fitted.seasonal_indices), 0.0, atol=1e-9)
    fc = fitted.forecast(12, [0.8])
    # The forecast keeps the season: its peak-to-trough swing is that of the history's cycle.
    swing = np.ptp(fc.point)
    assert swing > 0.5 * np.ptp(shifted.to_numpy()[-12:])
    assert ThetaSpec("always").fit(shifted, 12).seasonal_kind == "additive"


def test_refilter_keeps_alpha_and_slope() -> None:
    y = seasonal_series(n=84)
    fitted = ThetaSpec().fit(y[:72], 12)
    longer = fitted.refilter(y)
    assert (longer.alpha, longer.slope) == (fitted.alpha, fitted.slope)
    assert longer.forecast(1, [0.8]).index[0] == pd.Timestamp("2025-01-01")
