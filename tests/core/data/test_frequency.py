"""Frequencies: ISO 8601 durations and pandas aliases, anchoring, and default seasonal periods."""

from __future__ import annotations

import pandas as pd
import pytest

from service.core.data.frequency import (
    Step,
    frequency_name,
    parse_frequency,
    step_of,
)
from service.core.errors import SeriesError


@pytest.mark.parametrize(
    ("text", "first", "name"),
    [
        ("P1D", None, "D"),
        ("P7D", None, "7D"),
        ("PT1H", None, "h"),
        ("PT36H", None, "36h"),
        ("PT15M", None, "15min"),
        ("PT90M", None, "90min"),
        ("PT30S", None, "30s"),
        ("P1W", "2025-01-08", "W-WED"),
        ("P2W", "2025-01-06", "2W-MON"),
        ("P1M", "2025-01-01", "MS"),
        ("P1M", "2025-01-31", "ME"),
        ("P3M", "2025-04-01", "3MS"),
        ("P1Y", "2025-03-01", "YS-MAR"),
        ("P1Y", "2025-12-31", "YE-DEC"),
        ("D", None, "D"),
        ("W-MON", None, "W-MON"),
        ("MS", None, "MS"),
        ("h", None, "h"),
        ("15min", None, "15min"),
        ("B", None, "B"),
        ("QS-JAN", None, "QS-JAN"),
        ("YS-JAN", None, "YS-JAN"),
        (" P1D ", None, "D"),
    ],
)
def test_durations_and_aliases_become_offsets(text: str, first: str | None, name: str) -> None:
    stamp = pd.Timestamp(first) if first else None
    assert frequency_name(parse_frequency(text, stamp, "frequency")) == name


def test_a_month_anchored_mid_month_is_a_plain_month_step() -> None:
    offset = parse_frequency("P1M", pd.Timestamp("2025-01-15"), "frequency")
    assert step_of(offset) == Step("months", 1)
    assert frequency_name(offset) == "P1M"
    grid = pd.date_range("2025-01-15", periods=3, freq=offset)
    assert [t.day for t in grid] == [15, 15, 15]
    # The name round-trips: parsing it again on the same start gives the same grid.
    again = parse_frequency(frequency_name(offset), pd.Timestamp("2025-01-15"), "frequency")
    assert pd.date_range("2025-01-15", periods=3, freq=again).equals(grid)


def test_weeks_without_a_first_timestamp_end_on_sunday() -> None:
    assert frequency_name(parse_frequency("P1W", None, "frequency")) == "W-SUN"


@pytest.mark.parametrize(
    "text",
    [
        "",
        "   ",
        "P",
        "PT",
        "P0D",
        "P1.5D",
        "P1Y2M",
        "P1M1D",
        "P1WT1H",
        "XQ",
        "fortnightly",
        "0D",
        "-1D",
        "1D2",
    ],
)
def test_bad_frequencies_name_the_field(text: str) -> None:
    with pytest.raises(SeriesError) as caught:
        parse_frequency(text, None, "series.frequency")
    assert [p.field for p in caught.value.problems] == ["series.frequency"]


def test_a_non_string_frequency_is_refused() -> None:
    with pytest.raises(SeriesError):
        parse_frequency(7, None, "frequency")  # type: ignore[arg-type]


@pytest.mark.parametrize(
    ("text", "step"),
    [
        ("MS", Step("months", 1)),
        ("QS-JAN", Step("months", 3)),
        ("YS-JAN", Step("months", 12)),
        ("2W-MON", Step("weeks", 2)),
        ("B", Step("business_days", 1)),
        ("D", Step("seconds", 86400)),
        ("15min", Step("seconds", 900)),
    ],
)
def test_steps_reduce_to_one_unit(text: str, step: Step) -> None:
    assert step_of(parse_frequency(text, None, "frequency")) == step


@pytest.mark.parametrize(
    ("text", "name"),
    [
        ("M", "ME"),
        ("m", "ME"),
        ("3M", "3ME"),
        ("Q", "QE-DEC"),
        ("q-jun", "QE-JUN"),
        ("Y", "YE-DEC"),
        ("A", "YE-DEC"),
        ("a-dec", "YE-DEC"),
        ("AS", "YS-JAN"),
        ("H", "h"),
        ("2H", "2h"),
        ("T", "min"),
        ("15T", "15min"),
        ("S", "s"),
        ("s", "s"),
        ("d", "D"),
        ("MS", "MS"),
        ("min", "min"),
    ],
)
def test_spellings_people_write_mean_the_steps_they_name(text: str, name: str) -> None:
    assert frequency_name(parse_frequency(text, None, "frequency")) == name


@pytest.mark.parametrize(
    "text",
    ["99999999999999999999D", "P99999999999999999999D", "1000000D", "P1234567D", "ms", "10ms", "L"],
)
def test_overflowing_and_sub_second_frequencies_are_refused(text: str) -> None:
    with pytest.raises(SeriesError) as caught:
        parse_frequency(text, None, "series.frequency")
    assert [p.field for p in caught.value.problems] == ["series.frequency"]
