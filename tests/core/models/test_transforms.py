"""Transforms: round trips, λ estimation, bias adjustment and the fitted wrapper."""

from __future__ import annotations

import pickle

import numpy as np
import pandas as pd
import pytest
from numpy.testing import assert_allclose
from scipy import stats

from service.core.errors import FitError, SpecificationError
from service.core.models.ets.family import EtsSpec
from service.core.models.naive import NaiveSpec
from service.core.models.transforms import (
    Transform,
    TransformedSpec,
    bias_factor,
    boxcox,
    boxcox_lambda,
    fit_transformed,
    inverse_boxcox,
    transform_from_value,
)


def positive_series(n: int = 60, seed: int = 1) -> pd.Series:
    rng = np.random.default_rng(seed)
    values = np.exp(3 + 0.02 * np.arange(n) + 0.1 * rng.normal(size=n).cumsum())
    return pd.Series(values, index=pd.date_range("2019-01-01", periods=n, freq="MS"))


@pytest.mark.parametrize("lam", [-0.5, 0.0, 0.3, 1.0, 2.0])
def test_round_trip(lam: float) -> None:
    y = positive_series().to_numpy()
    assert_allclose(inverse_boxcox(boxcox(y, lam), lam), y, rtol=1e-12)
    assert_allclose(boxcox(y, lam), stats.boxcox(y, lmbda=lam), rtol=1e-12)


def test_inverse_outside_the_range_is_zero_or_infinite() -> None:
    assert inverse_boxcox(np.array([-5.0]), 0.5)[0] == 0.0
    assert inverse_boxcox(np.array([5.0]), -0.5)[0] == np.inf


def test_log_bias_factor_is_the_lognormal_mean() -> None:
    # exp(μ + σ²/2) ≈ exp(μ)(1 + σ²/2) to second order, as FPP3 §5.6 states.
    assert_allclose(bias_factor(np.array([1.0]), np.array([0.04]), 0.0), 1.02)


def test_log_transform_of_naive_back_transforms_quantiles() -> None:
    y = positive_series()
    fitted = fit_transformed(NaiveSpec(), y, 12, Transform("log", back_transform="median"))
    fc = fitted.forecast(3, [0.95])
    inner = NaiveSpec().fit(np.log(y), 12).forecast(3, [0.95])
    assert_allclose(fc.point, np.exp(inner.point))
    assert_allclose(fc.intervals[0].lower, np.exp(inner.intervals[0].lower))
    assert_allclose(fc.intervals[0].upper, np.exp(inner.intervals[0].upper))


def test_the_mean_back_transform_exceeds_the_median_for_log() -> None:
    y = positive_series()
    median = fit_transformed(NaiveSpec(), y, 12, Transform("log", back_transform="median"))
    mean = fit_transformed(NaiveSpec(), y, 12, Transform("log"))
    m, a = median.forecast(4, [0.8]).point, mean.forecast(4, [0.8]).point
    sigma = NaiveSpec().fit(np.log(y), 12).sigma
    expected = m * (1 + sigma**2 * np.arange(1, 5) / 2)
    assert_allclose(a, expected, rtol=1e-9)
    assert np.all(np.diff(a / m) > 0)  # the adjustment grows with the forecast variance


def test_boxcox_wrapper_estimates_lambda_describes_and_refilters() -> None:
    y = positive_series(n=72)
    spec = TransformedSpec(EtsSpec("add", "add", False, "none"), Transform("boxcox"))
    fitted = spec.fit(y[:60], 12)
    d = fitted.describe()
    assert_allclose(d.parameters["box_cox_power"], boxcox_lambda(y[:60].to_numpy()))
    assert d.label == f"ETS(A,A,N), on the Box-Cox scale (power {fitted.lam:.4g})"
    longer = fitted.refilter(y)
    assert longer.lam == fitted.lam
    fc = pickle.loads(pickle.dumps(longer)).forecast(2, [0.8, 0.95])
    assert np.all(fc.intervals[1].lower <= fc.intervals[0].lower)
    assert np.all(fc.intervals[0].lower <= fc.point) and np.all(fc.point <= fc.intervals[0].upper)


def test_non_positive_data_names_the_transform_field() -> None:
    y = positive_series()
    y.iloc[3] = 0.0
    with pytest.raises(FitError) as err:
        fit_transformed(NaiveSpec(), y, 12, Transform("log"))
    assert err.value.problems[0].field == "transform"


def test_none_transform_fits_the_base_directly() -> None:
    y = positive_series()
    assert type(fit_transformed(NaiveSpec(), y, 12, Transform())).__name__ == "NaiveFitted"


@pytest.mark.parametrize(
    ("value", "expected"),
    [
        ("log", Transform("log")),
        ({"kind": "boxcox", "power": 0.5}, Transform("boxcox", 0.5)),
        ({"kind": "boxcox", "back_transform": "median"}, Transform("boxcox", None, "median")),
        (None, Transform()),
    ],
)
def test_parse(value: object, expected: Transform) -> None:
    assert transform_from_value(value) == expected


@pytest.mark.parametrize(
    ("value", "field"),
    [
        ("sqrt", "transform"),
        ({"kind": "cube"}, "transform.kind"),
        ({"power": "2"}, "transform.power"),
        ({"back_transform": True}, "transform.back_transform"),
        ({"lambda": 0.5}, "transform.lambda"),
    ],
)
def test_parse_errors_name_the_field(value: object, field: str) -> None:
    with pytest.raises(SpecificationError) as err:
        transform_from_value(value)
    assert err.value.problems[0].field == field
