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
from service.core.models.theta_fit import running_slopes


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


# --- the slope share fitted with α (theta_fit.py) -----------------------------------------


def one_step_sse(y: np.ndarray, alpha: float, share: float, slopes: np.ndarray) -> float:
    """The model's one-step squared errors written out directly, a loop over the points."""
    total, level = 0.0, y[0]
    for t in range(1, y.size):
        forecast = level + share * slopes[t - 1] * (1 - (1 - alpha) ** t) / alpha
        total += (y[t] - forecast) ** 2
        level = alpha * y[t] + (1 - alpha) * level
    return total


def trending(n: int = 40, seed: int = 9) -> pd.Series:
    rng = np.random.default_rng(seed)
    values = 50 + 0.8 * np.arange(n) + rng.normal(0, 2, n).cumsum() * 0.5 + rng.normal(0, 1, n)
    return pd.Series(values, index=pd.date_range("1980-01-01", periods=n, freq="YS"))


def test_running_slopes_are_the_slopes_of_each_prefix() -> None:
    y = trending().to_numpy()
    slopes = running_slopes(y)
    assert slopes.shape == (y.size + 1,) and slopes[0] == slopes[1] == 0.0
    for k in (2, 3, 10, y.size):
        assert_allclose(slopes[k], np.polyfit(np.arange(k), y[:k], 1)[0], rtol=1e-9)


def test_a_straight_line_gets_the_whole_slope_and_is_continued() -> None:
    # Worked example: on y = a + b·t the one-step forecasts with share 1 are exact for any α
    # (SES lags a line by b(1 − α)/α, which the drift term puts back), so the fit carries
    # the whole slope and the forecast continues the line; the original method carries half.
    t = np.arange(25, dtype=float)
    y = pd.Series(3.0 + 2.0 * t, index=pd.date_range("2000-01-01", periods=25, freq="YS"))
    fitted = ThetaSpec(slope_share="fitted").fit(y, 1)
    assert_allclose(fitted.share, 1.0, atol=1e-9)
    assert_allclose(fitted.forecast(4, [0.8]).point, 3.0 + 2.0 * np.arange(25, 29), rtol=1e-9)
    half = ThetaSpec().fit(y, 1).forecast(4, [0.8]).point
    assert np.all(half < 3.0 + 2.0 * np.arange(25, 29) - 1.0)


@pytest.mark.parametrize("share_kind", ["fitted", "fitted_running"])
def test_fitted_share_and_alpha_minimise_the_one_step_errors(share_kind: str) -> None:
    y = trending()
    values = y.to_numpy()
    running = share_kind == "fitted_running"
    slopes = (
        running_slopes(values)[1:-1] if running else np.full(values.size - 1, ols_slope(values))
    )
    fitted = ThetaSpec(slope_share=share_kind).fit(y, 1)
    assert 0.0 <= fitted.share <= 1.0 and fitted.running is running
    best = one_step_sse(values, fitted.alpha, fitted.share, slopes)
    # The original method's (α, ½) is a feasible point; so is every point of a fine grid.
    classic = ThetaSpec().fit(y, 1)
    assert best <= one_step_sse(values, classic.alpha, 0.5, slopes) + 1e-9
    grid = min(
        one_step_sse(values, a, s, slopes)
        for a in np.linspace(0.05, 1.0, 39)
        for s in np.linspace(0.0, 1.0, 41)
    )
    assert best <= grid + 1e-9
    # σ̂ counts the share as a third estimate.
    assert_allclose(fitted.sigma() ** 2 * (values.size - 1 - 3), best, rtol=1e-9)


def test_half_share_is_the_original_method() -> None:
    y = seasonal_series()
    default = ThetaSpec().fit(y, 12)
    named = ThetaSpec(slope_share="half").fit(y, 12)
    assert default.share == named.share == 0.5 and not named.running
    assert np.array_equal(default.forecast(12, [0.8]).point, named.forecast(12, [0.8]).point)
    assert named.label == "theta, seasonally adjusted (period 12)"
    running = ThetaSpec(slope_share="fitted_running").fit(y, 12)
    assert running.label == (
        "theta, seasonally adjusted (period 12), slope share fitted on running slopes"
    )
    assert running.settled_structure() == ThetaSpec("always", "fitted_running")
    assert running.describe().parameters["slope_share"] == running.share


def test_refilter_keeps_the_slope_unless_it_runs() -> None:
    y = trending()
    shorter = y.iloc[:30]
    fixed = ThetaSpec(slope_share="fitted").fit(y, 1)
    assert fixed.refilter(shorter).slope == fixed.slope
    running = ThetaSpec(slope_share="fitted_running").fit(y, 1)
    moved = running.refilter(shorter)
    assert_allclose(moved.slope, ols_slope(shorter.to_numpy()), rtol=1e-12)
    assert (moved.alpha, moved.share) == (running.alpha, running.share)
