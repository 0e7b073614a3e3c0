"""d and D on seeded series, and the public entry point the ARIMA search calls."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from service.core.applicability import NotApplicable
from service.core.diagnostics.differencing import DifferencingOrders, differencing_orders, label
from service.core.errors import RequestError, SeriesError


def _series(values: np.ndarray, freq: str = "MS") -> pd.Series:
    return pd.Series(values, index=pd.date_range("2001-01-01", periods=values.size, freq=freq))


def _orders(values: np.ndarray, period: int) -> DifferencingOrders:
    return differencing_orders(_series(values), period)


def test_orders_on_simulated_series() -> None:
    seeds = range(20)
    walks = [_orders(np.cumsum(np.random.default_rng(s).normal(size=200)), 1) for s in seeds]
    noise = [_orders(np.random.default_rng(s).normal(size=200), 1) for s in seeds]
    twice = [
        _orders(np.cumsum(np.cumsum(np.random.default_rng(s).normal(size=200))), 1) for s in seeds
    ]
    assert sum(o.regular == 1 for o in walks) >= 17
    assert sum(o.regular == 0 for o in noise) >= 17
    assert sum(o.regular == 2 for o in twice) >= 17
    assert all(o.seasonal == 0 for o in walks + noise + twice)


@pytest.mark.parametrize("seed", range(5))
def test_strong_season_gets_one_seasonal_difference(seed: int) -> None:
    rng = np.random.default_rng(seed)
    values = 100 + 10 * np.sin(2 * np.pi * np.arange(240) / 12) + rng.normal(size=240)
    orders = _orders(values, 12)
    assert orders.seasonal == 1
    assert orders.steps[0].measure == "seasonal_strength" and orders.steps[0].value > 0.64
    assert orders.steps[1].series == "Δ12 y"
    assert orders.stationary_after is True


def test_missing_values_and_constant_series_give_orders_not_exceptions() -> None:
    values = np.cumsum(np.random.default_rng(2).normal(size=150))
    values[[0, 10, 11, 80]] = np.nan
    orders = _orders(values, 12)
    assert orders.regular in (1, 2)
    assert any("interpolated" in note for note in orders.notes)
    flat = _orders(np.full(40, 5.0), 12)
    assert (flat.regular, flat.seasonal) == (0, 0)
    assert any("constant" in note for note in flat.notes)
    assert isinstance(flat.adf_after, NotApplicable)


def test_bad_arguments_name_their_field() -> None:
    with pytest.raises(SeriesError) as caught:
        differencing_orders(np.arange(10.0), 1)  # type: ignore[arg-type]
    assert caught.value.problems[0].field == "series"
    with pytest.raises(RequestError) as bad:
        differencing_orders(_series(np.arange(30.0)), 0)
    assert bad.value.problems[0].field == "series.seasonal_period"


def test_labels() -> None:
    assert [label(0, 0, 12), label(1, 0, 12), label(1, 1, 12), label(2, 0, 4)] == [
        "y",
        "Δy",
        "ΔΔ12 y",
        "Δ²y",
    ]
