"""Croston and SBA: recursions, conventions and non-negative intervals."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from service.core.errors import FitError
from service.core.models.croston import CrostonSpec, croston_filter


def demand(values: list[float]) -> pd.Series:
    return pd.Series(values, index=pd.date_range("2024-01-01", periods=len(values), freq="W-MON"))


def test_first_demand_initialises_without_an_update() -> None:
    state = croston_filter(np.array([0, 4.0, 0, 0]), alpha=0.5)
    assert (state.size, state.interval) == (4.0, 2.0)
    assert np.isnan(state.fitted[:2]).all() and state.fitted[2] == 2.0


def test_sba_is_croston_times_one_minus_half_alpha() -> None:
    rng = np.random.default_rng(3)
    values = np.where(rng.random(60) < 0.3, rng.integers(1, 9, 60), 0).astype(float)
    y = demand(list(values))
    classic = CrostonSpec("classic", 0.2).fit(y).rate()
    sba = CrostonSpec("sba", 0.2).fit(y).rate()
    assert sba == pytest.approx(classic * 0.9, rel=1e-12)


def test_intervals_never_go_below_zero_and_nest() -> None:
    rng = np.random.default_rng(4)
    values = np.where(rng.random(80) < 0.25, rng.integers(1, 20, 80), 0).astype(float)
    fc = CrostonSpec().fit(demand(list(values))).forecast(6, [0.8, 0.95])
    narrow, wide = fc.intervals
    assert np.all(wide.lower >= 0.0)
    assert np.all(wide.lower <= narrow.lower) and np.all(narrow.lower <= fc.point)
    assert np.all(fc.point <= narrow.upper) and np.all(narrow.upper <= wide.upper)
    assert np.all(wide.upper > fc.point)


@pytest.mark.parametrize(
    ("values", "field"),
    [
        ([0, 0, 0], "series.values"),
        ([1, -2, 0], "series.values[1]"),
        ([1, np.nan], "series.values"),
    ],
)
def test_bad_demand_is_refused(values: list[float], field: str) -> None:
    with pytest.raises(FitError) as err:
        CrostonSpec().fit(demand(values))
    assert err.value.problems[0].field == field


def test_describe_names_the_state() -> None:
    d = CrostonSpec("sba").fit(demand([0, 3, 0, 0, 5, 0])).describe()
    assert d.label == "Croston's method, Syntetos-Boylan correction"
    assert set(d.parameters) == {"alpha", "demand_size", "demand_interval", "rate"}
