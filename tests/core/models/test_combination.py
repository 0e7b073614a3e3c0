"""Combination: equal or given weights for points and bounds, nested errors."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from numpy.testing import assert_allclose

from service.core.errors import FitError, SpecificationError
from service.core.models import registry
from service.core.models.combination import CombinationSpec
from service.core.models.drift import DriftSpec
from service.core.models.naive import NaiveSpec
from service.core.models.seasonal_naive import SeasonalNaiveSpec


def series(n: int = 48, seed: int = 6) -> pd.Series:
    rng = np.random.default_rng(seed)
    return pd.Series(
        50 + rng.normal(size=n).cumsum(), index=pd.date_range("2020-01-01", periods=n, freq="MS")
    )


def test_point_and_bounds_are_member_averages() -> None:
    y = series()
    combined = CombinationSpec((NaiveSpec(), DriftSpec())).fit(y, 12).forecast(4, [0.8, 0.95])
    a = NaiveSpec().fit(y, 12).forecast(4, [0.8, 0.95])
    b = DriftSpec().fit(y, 12).forecast(4, [0.8, 0.95])
    assert_allclose(combined.point, (a.point + b.point) / 2)
    for k in range(2):
        assert_allclose(
            combined.intervals[k].lower, (a.intervals[k].lower + b.intervals[k].lower) / 2
        )
        assert_allclose(
            combined.intervals[k].upper, (a.intervals[k].upper + b.intervals[k].upper) / 2
        )


def test_describe_lists_member_labels() -> None:
    spec = registry.specification_from_dict(
        {"family": "combination", "members": [{"family": "naive"}, {"family": "theta"}]}
    )
    d = spec.fit(series(), 12).describe()
    assert d.residual_diagnostics.members == ("naive", "theta")
    assert d.label == "combination of 2 models"
    assert "members[1].alpha" in d.parameters


def test_member_errors_name_the_member() -> None:
    y = series(n=10)
    spec = registry.specification_from_dict(
        {
            "family": "combination",
            "members": [{"family": "naive"}, {"family": "ets", "season": "add"}],
        }
    )
    with pytest.raises(FitError) as err:
        spec.fit(y, 12)
    assert err.value.problems[0].field == "model.members[1].season"


def test_nested_parse_errors_name_the_member() -> None:
    with pytest.raises(Exception) as err:
        registry.specification_from_dict(
            {"family": "combination", "members": [{"family": "naive", "colour": 1}]}
        )
    assert err.value.problems[0].field == "model.members[0].colour"  # type: ignore[attr-defined]


def test_refilter_refilters_every_member() -> None:
    y = series(n=60)
    fitted = CombinationSpec((NaiveSpec(), SeasonalNaiveSpec())).fit(y[:48], 12)
    longer = fitted.refilter(y)
    assert longer.forecast(1, [0.8]).index[0] == y.index[-1] + y.index.freq
    assert_allclose(longer.forecast(1, [0.8]).point, (y.iloc[-1] + y.iloc[-12]) / 2)


def test_weights_are_relative_and_apply_to_points_bounds_and_fits() -> None:
    y = series()
    spec = registry.specification_from_dict(
        {
            "family": "combination",
            "members": [{"family": "naive"}, {"family": "drift"}],
            "weights": [3, 1],
        }
    )
    fitted = spec.fit(y, 12)
    combined = fitted.forecast(4, [0.8])
    a = NaiveSpec().fit(y, 12)
    b = DriftSpec().fit(y, 12)
    fa, fb = a.forecast(4, [0.8]), b.forecast(4, [0.8])
    assert_allclose(combined.point, 0.75 * fa.point + 0.25 * fb.point)
    assert_allclose(
        combined.intervals[0].upper, 0.75 * fa.intervals[0].upper + 0.25 * fb.intervals[0].upper
    )
    expected = 0.75 * a.fitted_values() + 0.25 * b.fitted_values()
    assert_allclose(fitted.fitted_values().to_numpy(), expected.to_numpy())
    params = fitted.describe().parameters
    assert params["weight[0]"] == pytest.approx(0.75) and params["weight[1]"] == pytest.approx(0.25)


@pytest.mark.parametrize(
    ("weights", "field"),
    [
        ([1.0], "model.weights"),
        ([0.0, 0.0], "model.weights"),
        ([1.0, -1.0], "model.weights[1]"),
        (["a", 1.0], "model.weights"),
    ],
)
def test_bad_weights_name_the_field(weights: list[object], field: str) -> None:
    data = {
        "family": "combination",
        "members": [{"family": "naive"}, {"family": "drift"}],
        "weights": weights,
    }
    with pytest.raises(SpecificationError) as err:
        registry.specification_from_dict(data).fit(series(), 12)
    assert err.value.problems[0].field == field


@pytest.mark.parametrize(
    ("weights", "expected"),
    [
        ((1e308, 1e308), (0.5, 0.5)),
        ((1e308, 1e307), (10 / 11, 1 / 11)),
        ((5e-324, 0.0), (1.0, 0.0)),
        ((3.0, 1.0), (0.75, 0.25)),
    ],
)
def test_weights_are_normalised_without_overflow(
    weights: tuple[float, float], expected: tuple[float, float]
) -> None:
    spec = CombinationSpec(members=(NaiveSpec(), DriftSpec()), weights=weights)
    assert_allclose(spec.normalised_weights(), expected)
    y = series()
    point = spec.fit(y).forecast(3, (0.8,)).point
    naive = NaiveSpec().fit(y).forecast(3, (0.8,)).point
    drift = DriftSpec().fit(y).forecast(3, (0.8,)).point
    assert_allclose(point, expected[0] * naive + expected[1] * drift)
