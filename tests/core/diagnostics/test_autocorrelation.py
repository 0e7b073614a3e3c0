"""ACF, PACF, band and Ljung-Box against statsmodels, and lag clamping."""

from __future__ import annotations

import numpy as np
import pytest
from statsmodels.stats.diagnostic import acorr_ljungbox
from statsmodels.tsa.stattools import acf, pacf

from service.core.applicability import NotApplicable
from service.core.diagnostics.autocorrelation import (
    Correlogram,
    correlogram,
    default_max_lag,
    ljung_box,
    ljung_box_lags,
    partial_acf,
    sample_acf,
)


@pytest.mark.parametrize("n", [30, 301, 4096])
def test_acf_and_pacf_match_statsmodels(n: int) -> None:
    x = np.cumsum(np.random.default_rng(n).normal(size=n)) * 0.1 + np.random.default_rng(
        n + 1
    ).normal(size=n)
    lags = min(20, n // 2 - 1)
    ours = sample_acf(x, lags)
    np.testing.assert_allclose(ours, acf(x, nlags=lags, fft=True)[1:], atol=1e-12)
    # Durbin-Levinson on the biased autocovariance: statsmodels' "ldb" method.
    np.testing.assert_allclose(partial_acf(ours), pacf(x, nlags=lags, method="ldb")[1:], atol=1e-10)


def test_ljung_box_matches_statsmodels() -> None:
    x = np.random.default_rng(7).normal(size=200)
    r = sample_acf(x, 20)
    table = acorr_ljungbox(x, lags=[5, 10, 20])
    for lag in (5, 10, 20):
        q = ljung_box(r, x.size, lag)
        np.testing.assert_allclose(q.statistic, table.loc[lag, "lb_stat"], rtol=1e-10)
        np.testing.assert_allclose(q.p_value, table.loc[lag, "lb_pvalue"], rtol=1e-10)
        assert q.degrees_of_freedom == lag


def test_default_lags_and_ljung_box_lags_follow_the_stated_rules() -> None:
    assert default_max_lag(1000, 12) == 24
    assert default_max_lag(1000, 1) == 10
    assert default_max_lag(20, 12) == 5
    assert ljung_box_lags(300, 12) == (10, 12, 20, 24)
    assert ljung_box_lags(60, 1) == (10,)
    assert ljung_box_lags(20, 1) == (4,)


def test_too_many_lags_are_clamped_with_a_note() -> None:
    x = np.random.default_rng(0).normal(size=40)
    result = correlogram(x, 500, 1)
    assert isinstance(result, Correlogram)
    assert result.max_lag == 19
    assert any("clamped" in note for note in result.notes)
    assert len(result.acf) == 19


def test_white_noise_has_few_significant_lags_and_ar_has_lag_one() -> None:
    rng = np.random.default_rng(11)
    noise = correlogram(rng.normal(size=500), 20, 1)
    assert isinstance(noise, Correlogram)
    assert len(noise.significant_acf_lags) <= 3
    e = rng.normal(size=500)
    ar = np.zeros(500)
    for t in range(1, 500):
        ar[t] = 0.6 * ar[t - 1] + e[t]
    fitted = correlogram(ar, 20, 1)
    assert isinstance(fitted, Correlogram)
    assert fitted.significant_pacf_lags[0] == 1
    assert 1 in fitted.significant_acf_lags


@pytest.mark.parametrize("x", [np.ones(30), np.array([1.0, 2.0, 3.0])])
def test_constant_or_tiny_series_are_not_applicable(x: np.ndarray) -> None:
    assert isinstance(correlogram(x, 5, 1), NotApplicable)
