"""Arithmetic grids equal pandas.date_range, dates, unit, zone and freq included."""

from __future__ import annotations

import pandas as pd
import pytest

from service.core.data.grid import future_index, index_after, regular_grid

CASES = [
    ("MS", "2010-01-01"),
    ("MS", "1999-11-01T06:30:00"),
    ("3MS", "2010-02-01"),
    ("ME", "2010-01-31"),
    ("2ME", "2011-02-28"),
    ("QS", "2010-01-01"),
    ("QS-FEB", "2010-02-01"),
    ("QE", "2010-03-31"),
    ("QE-NOV", "2010-11-30"),
    ("YS", "2010-01-01"),
    ("YS-JUL", "2010-07-01"),
    ("YE", "2010-12-31"),
    ("W-MON", "2025-01-06"),
    ("2W-SUN", "2025-01-05T12:00:00"),
    ("MS", "2010-01-01T00:00:00Z"),
    ("W-MON", "2025-01-06T00:00:00+00:00"),
    ("MS", "2010-01-01T00:00:00+02:00"),  # a fixed offset: left to date_range
    ("MS", "2024-01-01T00:00:00"),  # then across a leap day
    ("D", "2024-02-27"),
    ("h", "2024-03-30T22:00:00"),
]


@pytest.mark.parametrize(("alias", "start"), CASES)
@pytest.mark.parametrize("periods", [1, 2, 13, 240])
def test_the_grid_is_what_date_range_gives(alias: str, start: str, periods: int) -> None:
    first = pd.Timestamp(start)
    offset = pd.tseries.frequencies.to_offset(alias)
    expected = pd.date_range(start=first, periods=periods, freq=offset)
    found = regular_grid(first, periods, offset)
    assert found.dtype == expected.dtype
    assert found.equals(expected)
    assert (found.asi8 == expected.asi8).all()
    assert found.freq == expected.freq


def test_a_zone_with_daylight_saving_keeps_its_wall_clock() -> None:
    first = pd.Timestamp("2024-01-01", tz="Europe/Berlin")
    offset = pd.tseries.frequencies.to_offset("MS")
    found = regular_grid(first, 12, offset)
    assert found.equals(pd.date_range(start=first, periods=12, freq=offset))
    assert {t.hour for t in found} == {0}


def test_a_first_date_off_the_grid_rolls_as_date_range_does() -> None:
    first = pd.Timestamp("2010-01-15")
    offset = pd.tseries.frequencies.to_offset("MS")
    assert regular_grid(first, 5, offset).equals(pd.date_range(first, periods=5, freq=offset))


@pytest.mark.parametrize("freq", ["MS", "D", "h", "W-SUN", "QS", "ME", "30min", "YE"])
def test_index_after_equals_future_index_of_the_prefix(freq: str) -> None:
    index = pd.date_range("2020-01-01", periods=60, freq=freq, tz="UTC" if freq == "h" else None)
    for origin in (10, 40, 55, 60):
        for horizon in (1, 5, 12):
            expected = future_index(index[:origin], horizon)
            got = index_after(index, origin, horizon)
            assert got.equals(expected)
            assert got.freq == expected.freq
