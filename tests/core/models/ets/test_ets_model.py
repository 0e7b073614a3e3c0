"""The lean ETSModel subclass: bit-identical likelihoods and fits, no covariance computed."""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest
from statsmodels.tsa.exponential_smoothing.ets import ETSModel

from service.core.models.ets.lean import LeanEtsModel

SHAPES = [
    {"error": "add", "trend": "add", "damped_trend": True, "seasonal": "add"},
    {"error": "mul", "trend": None, "damped_trend": False, "seasonal": "mul"},
    {"error": "mul", "trend": "add", "damped_trend": False, "seasonal": None},
]


def positive_seasonal(n: int = 84, seed: int = 5) -> pd.Series:
    rng = np.random.default_rng(seed)
    t = np.arange(n)
    values = 80 + 0.3 * t + 6 * np.sin(2 * np.pi * t / 12) + rng.normal(0, 1.5, n)
    return pd.Series(values)


def kwargs_for(shape: dict[str, object]) -> dict[str, object]:
    return {**shape, "seasonal_periods": 12 if shape["seasonal"] else None}


@pytest.mark.parametrize("shape", SHAPES)
def test_fits_are_bit_identical_to_statsmodels(shape: dict[str, object]) -> None:
    y = positive_seasonal()
    with warnings.catch_warnings(), np.errstate(all="ignore"):
        warnings.simplefilter("ignore")
        for method in ("heuristic", "estimated"):
            ours = LeanEtsModel(y, initialization_method=method, **kwargs_for(shape))
            theirs = ETSModel(y, initialization_method=method, **kwargs_for(shape))
            a = ours.fit(disp=False, maxiter=300)
            b = theirs.fit(disp=False, maxiter=300)
            assert np.array_equal(np.asarray(a.params), np.asarray(b.params))
            assert a.llf == b.llf
            assert np.array_equal(np.asarray(a.forecast(24)), np.asarray(b.forecast(24)))


def test_the_covariance_is_not_computed() -> None:
    y = positive_seasonal()
    with warnings.catch_warnings(), np.errstate(all="ignore"):
        warnings.simplefilter("ignore")
        result = LeanEtsModel(y, **kwargs_for(SHAPES[0])).fit(disp=False, maxiter=50)
    k = len(result.params)
    assert result.cov_params_default.shape == (k, k)
    assert np.isnan(result.cov_params_default).all()
