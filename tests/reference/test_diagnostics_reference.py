"""Published values behind the diagnostics: critical values, chi-square quantiles, the band.

Each check names its source; tests/reference/README.md has the rows and tolerances.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from statsmodels.tsa.stattools import adfuller

from service.core.diagnostics.autocorrelation import (
    Correlogram,
    correlogram,
    ljung_box,
    white_noise_band,
)
from service.core.diagnostics.stationarity import (
    HypothesisTest,
    adf_critical_values,
    adf_test,
    kpss_test,
)


def test_adf_asymptotic_critical_values_constant_only() -> None:
    # SOURCE: MacKinnon (2010), QED Working Paper 1227, Table 2, constant, asymptotic row.
    values = adf_critical_values("c", math.inf)
    np.testing.assert_allclose(
        [values["1%"], values["5%"], values["10%"]], [-3.43035, -2.86154, -2.56677], atol=1e-4
    )


def test_adf_critical_values_at_one_hundred_regression_observations() -> None:
    # SOURCE: MacKinnon (2010), QED WP 1227, Table 2 response surface at T = 100:
    # -3.4975 / -2.8909 / -2.5824. T counts the regression's rows (len - lags - 1): 101
    # points with no augmentation lags give T = 100.
    y = np.cumsum(np.random.default_rng(0).normal(size=101))
    result = adf_test(y, "c", max_lag=0)
    assert isinstance(result, HypothesisTest)
    assert result.observations == 100
    values = result.critical_values
    np.testing.assert_allclose(
        [values["1%"], values["5%"], values["10%"]], [-3.4975, -2.8909, -2.5824], atol=1e-4
    )


@pytest.mark.parametrize(
    ("regression", "table"),
    [("c", [0.347, 0.463, 0.574, 0.739]), ("ct", [0.119, 0.146, 0.176, 0.216])],
)
def test_kpss_critical_values(regression: str, table: list[float]) -> None:
    # SOURCE: Kwiatkowski, Phillips, Schmidt & Shin (1992), Table 1 (10 / 5 / 2.5 / 1 %).
    result = kpss_test(np.random.default_rng(1).normal(size=80), regression)  # type: ignore[arg-type]
    assert isinstance(result, HypothesisTest)
    assert [result.critical_values[k] for k in ("10%", "5%", "2.5%", "1%")] == table


@pytest.mark.parametrize(("lag", "quantile"), [(10, 18.307), (20, 31.410)])
def test_ljung_box_p_value_at_the_chi_square_quantile(lag: int, quantile: float) -> None:
    # SOURCE: NIST/SEMATECH e-Handbook, chi-square table: chi2_0.95(10) = 18.307,
    # chi2_0.95(20) = 31.410. Autocorrelations chosen so that Q equals the quantile exactly.
    n = 200
    k = np.arange(1, lag + 1)
    acf = np.sqrt(quantile / (lag * n * (n + 2)) * (n - k))
    q = ljung_box(acf, n, lag)
    np.testing.assert_allclose(q.statistic, quantile, rtol=1e-12)
    assert q.degrees_of_freedom == lag
    np.testing.assert_allclose(q.p_value, 0.05, atol=5e-4 / lag)


@pytest.mark.parametrize("n", [50, 144, 1000])
def test_white_noise_band(n: int) -> None:
    # SOURCE: Bartlett (1946) under the white-noise hypothesis (common practice): ±1.959964/√n
    # centred on 0, not statsmodels' acf(alpha=) band centred on each estimate.
    assert white_noise_band(n) == 1.959964 / math.sqrt(n)
    result = correlogram(np.random.default_rng(n).normal(size=n), 10, 1)
    assert isinstance(result, Correlogram)
    assert result.band == 1.959964 / math.sqrt(n)


@pytest.mark.parametrize("seed", range(12))
@pytest.mark.parametrize("regression", ["c", "ct"])
def test_adf_equals_statsmodels_adfuller(seed: int, regression: str) -> None:
    # SOURCE: statsmodels.tsa.stattools.adfuller (reference implementation, same data and
    # lag search). Scaled series (level 1e9) check the conditioning of our factorisation.
    rng = np.random.default_rng(seed)
    n = int(rng.integers(20, 1400))
    y = np.cumsum(rng.normal(size=n)) if seed % 2 else rng.normal(size=n) + 0.05 * np.arange(n)
    if seed % 3 == 0:
        y = y * 1e6 + 1e9
    ours = adf_test(y, regression)  # type: ignore[arg-type]
    theirs = adfuller(y, regression=regression, autolag="AIC", result_object=True)
    assert isinstance(ours, HypothesisTest)
    assert (ours.lags_used, ours.observations) == (theirs.lags, theirs.nobs)
    np.testing.assert_allclose(ours.statistic, theirs.statistic, rtol=1e-7)
    np.testing.assert_allclose(ours.p_value, theirs.pvalue, rtol=1e-7, atol=1e-12)
    for key, value in theirs.critical_values.items():
        np.testing.assert_allclose(ours.critical_values[key], value, rtol=1e-12)
