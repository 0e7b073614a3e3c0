"""Property: any regular series round-trips through parse_series, in both wire forms.

Derandomized with a small example budget so the suite stays fast and repeatable.
"""

from __future__ import annotations

import json
from dataclasses import dataclass
from datetime import timedelta, timezone

import numpy as np
import pandas as pd
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from service.core.data.frequency import frequency_name, parse_frequency
from service.core.data.series import parse_series

PROPERTY = settings(
    max_examples=40,
    derandomize=True,
    database=None,
    deadline=None,
    suppress_health_check=[HealthCheck.too_slow],
)
WEEKDAYS = ("MON", "TUE", "WED", "THU", "FRI", "SAT", "SUN")
# Fixed UTC offsets in minutes, including half- and quarter-hour zones.
OFFSETS = (-300, -210, 0, 60, 330, 345, 600)


@dataclass(frozen=True)
class Case:
    """A regular series as the wire would carry it, with the grid it must parse to."""

    values: list[float]
    stamps: list[str]
    start: str
    frequency: str
    grid: pd.DatetimeIndex


def _iso(index: pd.DatetimeIndex) -> list[str]:
    return [t.isoformat() for t in index]


@st.composite
def regular_series(draw: st.DrawFn) -> Case:
    """A start on its frequency's anchor, a length and finite values."""
    kind = draw(st.sampled_from(["D", "W", "MS", "ME", "h", "h-aware", "D-aware", "15min"]))
    day = pd.Timestamp("2020-01-01") + pd.Timedelta(days=draw(st.integers(0, 2500)))
    n = draw(st.integers(3, 60))
    if kind == "W":
        weekday = draw(st.sampled_from(WEEKDAYS))
        alias = f"W-{weekday}"
        start = day + pd.Timedelta(days=(WEEKDAYS.index(weekday) - day.weekday()) % 7)
    elif kind in ("MS", "ME"):
        alias = kind
        start = day.replace(day=1) if kind == "MS" else day + pd.offsets.MonthEnd(0)
    elif kind == "h" or kind == "15min":
        alias = kind
        start = day + pd.Timedelta(hours=draw(st.integers(0, 23)))
    else:
        alias = kind.split("-")[0]
        start = day
    if kind.endswith("aware"):
        minutes = draw(st.sampled_from(OFFSETS))
        start = start.tz_localize(timezone(timedelta(minutes=minutes)))
    grid = pd.date_range(start=start, periods=n, freq=alias)
    values = draw(
        st.lists(
            st.floats(
                allow_nan=False, allow_infinity=False, width=64, min_value=-1e15, max_value=1e15
            ),
            min_size=n,
            max_size=n,
        )
    )
    return Case(values, _iso(grid), start.isoformat(), alias, grid)


def _through_json(case: Case) -> Case:
    """The case after a JSON round trip, as a request body would carry it."""
    loaded = json.loads(json.dumps({"values": case.values, "timestamps": case.stamps}))
    return Case(loaded["values"], loaded["timestamps"], case.start, case.frequency, case.grid)


def _assert_same(parsed_y: pd.Series, case: Case) -> None:
    assert parsed_y.index.equals(case.grid)
    assert parsed_y.index.freq == case.grid.freq
    assert str(parsed_y.index.tz) == str(case.grid.tz)
    np.testing.assert_array_equal(parsed_y.to_numpy(), np.asarray(case.values, dtype=float))


@PROPERTY
@given(regular_series())
def test_timestamps_form_round_trips_with_an_inferred_frequency(case: Case) -> None:
    case = _through_json(case)
    parsed = parse_series(case.values, timestamps=case.stamps)
    _assert_same(parsed.y, case)
    assert parsed.missing_count == parsed.filled_gaps == 0


@PROPERTY
@given(regular_series())
def test_timestamps_form_round_trips_with_the_frequency_given(case: Case) -> None:
    case = _through_json(case)
    parsed = parse_series(case.values, timestamps=case.stamps, frequency=case.frequency)
    _assert_same(parsed.y, case)


@PROPERTY
@given(regular_series())
def test_start_form_round_trips(case: Case) -> None:
    case = _through_json(case)
    parsed = parse_series(case.values, start=case.start, frequency=case.frequency)
    _assert_same(parsed.y, case)


@PROPERTY
@given(regular_series())
def test_the_reported_frequency_rebuilds_the_same_grid(case: Case) -> None:
    parsed = parse_series(case.values, timestamps=case.stamps)
    again = parse_frequency(parsed.frequency, parsed.y.index[0], "frequency")
    assert frequency_name(again) == parsed.frequency
    rebuilt = pd.date_range(start=parsed.y.index[0], periods=parsed.y.size, freq=again)
    assert rebuilt.equals(case.grid)


@PROPERTY
@given(regular_series(), st.data())
def test_dropping_inner_timestamps_on_a_declared_grid_gives_missing_values(
    case: Case, data: st.DataObject
) -> None:
    inner = list(range(1, len(case.values) - 1))
    dropped = set(data.draw(st.lists(st.sampled_from(inner), unique=True, max_size=3)))
    keep = [i for i in range(len(case.values)) if i not in dropped]
    parsed = parse_series(
        [case.values[i] for i in keep],
        timestamps=[case.stamps[i] for i in keep],
        frequency=case.frequency,
        missing="keep",
    )
    assert parsed.y.index.equals(case.grid)
    assert parsed.filled_gaps == parsed.missing_count == len(dropped)
    assert sorted(np.flatnonzero(parsed.y.isna().to_numpy()).tolist()) == sorted(dropped)
