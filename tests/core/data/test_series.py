"""parse_series: both wire forms, grids and gaps, the missing policy, and errors naming fields."""

from __future__ import annotations

from typing import Any

import numpy as np
import pandas as pd
import pytest

from service.core.data.frequency import parse_frequency
from service.core.data.series import Aggregation, parse_series
from service.core.data.timestamps import check_horizon_in_range, grid_length
from service.core.errors import RequestError, SeriesError


def problem_fields(**kwargs: Any) -> list[str]:
    """The fields a SeriesError names for this call (fails the test if nothing is raised)."""
    values = kwargs.pop("values", [1.0, 2.0, 3.0, 4.0])
    with pytest.raises(SeriesError) as caught:
        parse_series(values, **kwargs)
    return [p.field for p in caught.value.problems]


def test_start_form_builds_the_grid_from_start_and_frequency() -> None:
    parsed = parse_series([5.0, 6.0, 7.0], start="2025-01-06", frequency="P1W")
    expected = pd.date_range("2025-01-06", periods=3, freq="W-MON")
    assert parsed.y.index.equals(expected)
    assert parsed.y.index.freqstr == "W-MON"
    assert parsed.frequency == "W-MON"
    # Three weeks hold no two full years: no default period (52.18 needs 105 weeks).
    assert parsed.seasonal_period == 1
    assert parsed.seasonal_periods == ()
    assert parsed.y.tolist() == [5.0, 6.0, 7.0]


def test_timestamps_form_infers_the_frequency() -> None:
    parsed = parse_series(
        [1, 2.5, 3], timestamps=["2025-01-01", "2025-02-01", "2025-03-01"], name="energy"
    )
    assert parsed.frequency == "MS"
    assert parsed.seasonal_period == 1  # 12 needs 24 months of history
    assert parsed.name == "energy"
    assert parsed.y.name == "energy"
    assert parsed.y.dtype == np.float64
    assert parsed.y.tolist() == [1.0, 2.5, 3.0]


def test_both_forms_give_the_same_series() -> None:
    stamps = [t.isoformat() for t in pd.date_range("2025-03-03", periods=5, freq="h")]
    values = [3.0, 1.0, 4.0, 1.0, 5.0]
    by_stamps = parse_series(values, timestamps=stamps)
    by_start = parse_series(values, start=stamps[0], frequency="PT1H")
    pd.testing.assert_series_equal(by_stamps.y, by_start.y, check_freq=True)
    assert by_stamps.seasonal_period == by_start.seasonal_period == 1  # 24 needs 48 hours


def test_an_aware_series_keeps_its_single_offset() -> None:
    stamps = ["2025-01-01T00:00:00+02:00", "2025-01-01T01:00:00+02:00", "2025-01-01T02:00:00+02:00"]
    parsed = parse_series([1, 2, 3], timestamps=stamps)
    assert parsed.y.index[0] == pd.Timestamp("2024-12-31T22:00:00Z")
    assert parsed.y.index[0].utcoffset() == pd.Timedelta(hours=2)


def test_a_gap_on_a_declared_grid_is_interpolated_by_default() -> None:
    parsed = parse_series(
        [1.0, 2.0, 4.0], timestamps=["2025-01-01", "2025-01-02", "2025-01-04"], frequency="D"
    )
    assert parsed.y.tolist() == [1.0, 2.0, 3.0, 4.0]
    assert (parsed.filled_gaps, parsed.missing_count, parsed.interpolated) == (1, 1, 1)
    assert parsed.y.index.freqstr == "D"


def test_keep_leaves_missing_values_as_nan() -> None:
    parsed = parse_series([1.0, None, 3.0, 4.0], start="2025-01-01", frequency="D", missing="keep")
    assert np.isnan(parsed.y.iloc[1])
    assert (parsed.missing_count, parsed.interpolated) == (1, 0)


def test_interpolation_fills_the_edges_from_the_nearest_observation() -> None:
    parsed = parse_series([None, 2.0, None, 6.0, None], start="2025-01-01", frequency="D")
    assert parsed.y.tolist() == [2.0, 2.0, 4.0, 6.0, 6.0]


def test_the_input_lists_are_not_changed() -> None:
    values: list[Any] = [1.0, None, 3.0]
    stamps = ["2025-01-01", "2025-01-02", "2025-01-03"]
    parse_series(values, timestamps=stamps)
    assert values == [1.0, None, 3.0]
    assert stamps == ["2025-01-01", "2025-01-02", "2025-01-03"]


def test_aggregation_sums_onto_the_coarser_grid() -> None:
    parsed = parse_series(
        list(range(1, 9)), start="2025-01-01", frequency="D", aggregate=Aggregation("P2D", "sum")
    )
    assert parsed.y.tolist() == [3.0, 7.0, 11.0, 15.0]
    assert parsed.y.index.freqstr == "2D"
    assert parsed.seasonal_period == 1


def test_a_given_seasonal_period_wins_over_the_default() -> None:
    parsed = parse_series([1, 2, 3, 4], start="2025-01-01", frequency="D", seasonal_period=4)
    assert parsed.seasonal_period == 4


@pytest.mark.parametrize(
    ("kwargs", "field"),
    [
        pytest.param(
            {"values": None, "start": "2025-01-01", "frequency": "D"}, "values", id="none"
        ),
        pytest.param(
            {"values": "1,2", "start": "2025-01-01", "frequency": "D"}, "values", id="str"
        ),
        pytest.param({"values": [], "start": "2025-01-01", "frequency": "D"}, "values", id="empty"),
        pytest.param(
            {"values": [1, 2], "start": "2025-01-01", "frequency": "D"}, "values", id="short"
        ),
        pytest.param(
            {"values": [1, 2, 3, 4], "start": "2025-01-01", "frequency": "D", "max_points": 3},
            "values",
            id="long",
        ),
        pytest.param(
            {"values": [1, "2", 3], "start": "2025-01-01", "frequency": "D"}, "values[1]", id="text"
        ),
        pytest.param(
            {"values": [1, 2, True], "start": "2025-01-01", "frequency": "D"},
            "values[2]",
            id="bool",
        ),
        pytest.param(
            {"values": [float("nan"), 2, 3], "start": "2025-01-01", "frequency": "D"},
            "values[0]",
            id="nan",
        ),
        pytest.param(
            {"values": [1, float("-inf"), 3], "start": "2025-01-01", "frequency": "D"},
            "values[1]",
            id="inf",
        ),
        pytest.param(
            {"values": [1, 2, 10**400], "start": "2025-01-01", "frequency": "D"},
            "values[2]",
            id="overflow",
        ),
        pytest.param({"values": [1, 2, 3]}, "timestamps", id="no-index"),
        pytest.param({"start": "2025-01-01"}, "frequency", id="start-without-frequency"),
        pytest.param(
            {"start": "2025-01-01", "frequency": "D", "timestamps": ["2025-01-01"] * 4},
            "start",
            id="start-and-timestamps",
        ),
        pytest.param({"start": "2025-01-02", "frequency": "MS"}, "start", id="start-off-anchor"),
        pytest.param({"start": "today", "frequency": "D"}, "start", id="start-word"),
        pytest.param({"start": 20250101, "frequency": "D"}, "start", id="start-number"),
        pytest.param({"timestamps": ["2025-01-01"] * 3}, "timestamps", id="length-mismatch"),
        pytest.param(
            {"timestamps": ["2025-01-01", "2025-01-02", "2025-13-01", "2025-01-04"]},
            "timestamps[2]",
            id="unparseable",
        ),
        pytest.param(
            {"timestamps": ["2025-01-01", 2, "2025-01-03", "2025-01-04"]},
            "timestamps[1]",
            id="not-a-string",
        ),
        pytest.param(
            {"timestamps": ["2025-01-01", "2025-01-03", "2025-01-02", "2025-01-04"]},
            "timestamps[2]",
            id="unsorted",
        ),
        pytest.param(
            {"timestamps": ["2025-01-01", "2025-01-02", "2025-01-02", "2025-01-03"]},
            "timestamps[2]",
            id="duplicate",
        ),
        pytest.param(
            {"timestamps": ["2025-01-01", "2025-01-02", "2025-01-03", "2025-01-05"]},
            "timestamps[3]",
            id="irregular",
        ),
        pytest.param(
            {
                "timestamps": [
                    "2025-01-01T00:00:00+01:00",
                    "2025-01-02T00:00:00+01:00",
                    "2025-01-03T00:00:00+02:00",
                    "2025-01-04T00:00:00+02:00",
                ]
            },
            "timestamps[2]",
            id="mixed-offsets",
        ),
        pytest.param(
            {"timestamps": ["2025-01-01", "2025-01-02T00:00:00Z", "2025-01-03", "2025-01-04"]},
            "timestamps[1]",
            id="aware-and-naive",
        ),
        pytest.param(
            {
                "timestamps": ["2025-01-01", "2025-01-02", "2025-01-03", "2025-01-04"],
                "frequency": "2D",
            },
            "timestamps[1]",
            id="off-the-declared-grid",
        ),
        pytest.param(
            {
                "timestamps": ["2025-01-01", "2025-01-08", "2025-01-15", "2025-01-22"],
                "frequency": "W-MON",
            },
            "timestamps[0]",
            id="first-off-anchor",
        ),
        pytest.param(
            {"start": "2025-01-01", "frequency": "fortnightly"}, "frequency", id="bad-frequency"
        ),
        pytest.param(
            {"start": "2025-01-01", "frequency": "D", "seasonal_period": 0},
            "seasonal_period",
            id="seasonal-period-zero",
        ),
        pytest.param(
            {"start": "2025-01-01", "frequency": "D", "missing": "drop"}, "missing", id="bad-policy"
        ),
        pytest.param(
            {
                "values": [1, None, 3, 4],
                "start": "2025-01-01",
                "frequency": "D",
                "missing": "error",
            },
            "values[1]",
            id="missing-error-null",
        ),
        pytest.param(
            {
                "values": [1, 2, 4],
                "timestamps": ["2025-01-01", "2025-01-02", "2025-01-04"],
                "frequency": "D",
                "missing": "error",
            },
            "timestamps",
            id="missing-error-gap",
        ),
        pytest.param(
            {"values": [None, None, None], "start": "2025-01-01", "frequency": "D"},
            "values",
            id="all-null",
        ),
    ],
)
def test_errors_name_the_field(kwargs: dict[str, Any], field: str) -> None:
    assert problem_fields(**kwargs)[0] == field


def test_every_bad_value_is_listed_not_only_the_first() -> None:
    fields = problem_fields(values=[1, "a", 3, None, True, 6], start="2025-01-01", frequency="D")
    assert fields == ["values[1]", "values[4]"]


def test_irregular_with_a_frequency_becomes_gaps_not_an_error() -> None:
    parsed = parse_series(
        [1, 2, 3, 5],
        timestamps=["2025-01-01", "2025-01-02", "2025-01-03", "2025-01-05"],
        frequency="D",
        missing="keep",
    )
    assert parsed.y.size == 5
    assert np.isnan(parsed.y.iloc[3])


@pytest.mark.parametrize(
    ("first", "last", "frequency", "points"),
    [
        ("2024-01-01", "2024-01-31", "D", 31),
        ("2024-01-01T00:00", "2024-01-01T23:00", "h", 24),
        ("2024-01-31", "2024-12-31", "ME", 12),
        ("2024-01-01", "2026-01-01", "QS-JAN", 9),
        ("2024-01-01", "2024-12-30", "W-MON", 53),
        ("1700-01-01", "2200-01-01", "min", 262_974_241),
    ],
)
def test_the_grid_is_sized_without_being_built(
    first: str, last: str, frequency: str, points: int
) -> None:
    offset = parse_frequency(frequency, None, "frequency")
    assert grid_length(pd.Timestamp(first), pd.Timestamp(last), offset) == points


def test_a_grid_over_the_point_limit_is_refused_before_it_is_built() -> None:
    with pytest.raises(SeriesError) as caught:
        parse_series(
            [1.0, 2.0, 3.0],
            timestamps=["1700-01-01T00:00", "1900-01-01T00:00", "2200-01-01T00:00"],
            frequency="PT1M",
            max_points=1_000,
        )
    assert caught.value.problems[0].field == "frequency"
    assert "262974241" in caught.value.message


@pytest.mark.parametrize(
    ("series", "field"),
    [
        ({"timestamps": ["0001-01-01", "0001-01-02", "0001-01-03"]}, "timestamps[0]"),
        ({"timestamps": ["2024-01-01", "2024-01-02", "9999-01-03"]}, "timestamps[2]"),
        ({"start": "9999-01-01", "frequency": "D"}, "start"),
        ({"start": "2261-12-30", "frequency": "D"}, "start"),
        ({"timestamps": ["2024-01-01" + "0" * 100, "2024-01-02", "2024-01-03"]}, "timestamps[0]"),
        ({"start": "2024-01-01" + " " * 100, "frequency": "D"}, "start"),
    ],
)
def test_timestamps_out_of_range_or_too_long_name_the_field(
    series: dict[str, Any], field: str
) -> None:
    with pytest.raises(SeriesError) as caught:
        parse_series([1.0, 2.0, 3.0], **series)
    assert caught.value.problems[0].field == field
    assert len(caught.value.message) < 200


def test_aggregation_to_a_finer_step_is_refused() -> None:
    with pytest.raises(SeriesError) as caught:
        parse_series([1.0] * 10, start="2024-01-01", frequency="D", aggregate=Aggregation("PT1S"))
    assert caught.value.problems[0].field == "aggregate.frequency"


def test_values_beyond_the_magnitude_bound_name_their_index() -> None:
    with pytest.raises(SeriesError) as caught:
        parse_series([1.0, 1e31, 2.0, -1e300], start="2024-01-01", frequency="D")
    assert [p.field for p in caught.value.problems] == ["values[1]", "values[3]"]


def test_a_horizon_past_the_supported_range_is_refused() -> None:
    parsed = parse_series([1.0, 2.0, 3.0], start="2261-01-01", frequency="MS")
    check_horizon_in_range(parsed.y.index, 3)
    with pytest.raises(RequestError) as caught:
        check_horizon_in_range(parsed.y.index, 24)
    assert caught.value.problems[0].field == "horizon"


@pytest.mark.parametrize(
    ("frequency", "points", "periods"),
    [
        ("h", 48, (24.0,)),
        ("h", 336, (24.0, 168.0)),
        ("30min", 700, (48.0, 336.0)),
        ("15min", 2016, (96.0, 672.0)),
        ("D", 20, (7.0,)),
        ("D", 731, (7.0, 365.25)),
        ("B", 10, (5.0,)),
        ("W-WED", 105, (52.18,)),
        ("MS", 24, (12.0,)),
        ("QS-JAN", 8, (4.0,)),
        ("YS-JAN", 50, ()),
    ],
)
def test_default_periods_follow_the_table_when_two_cycles_fit(
    frequency: str, points: int, periods: tuple[float, ...]
) -> None:
    parsed = parse_series([1.0] * points, start="2025-01-01", frequency=frequency)
    assert parsed.seasonal_periods == periods
    assert parsed.seasonal_period == (round(periods[0]) if periods else 1)


def test_several_periods_are_sorted_and_non_integer_ones_allowed() -> None:
    parsed = parse_series(
        [1.0] * 800, start="2025-01-06", frequency="D", seasonal_period=[365.25, 7]
    )
    assert parsed.seasonal_periods == (7.0, 365.25)
    assert parsed.seasonal_period == 7


@pytest.mark.parametrize(
    ("given", "field"),
    [
        ([24, 0.5], "seasonal_period[1]"),
        ([24, 1.5], "seasonal_period[1]"),
        (1.5, "seasonal_period"),
        ([24, 24], "seasonal_period[1]"),
        ([24, "x"], "seasonal_period[1]"),
        ([], "seasonal_period"),
        (0.5, "seasonal_period"),
        ([2, 3, 4, 5, 6, 7], "seasonal_period"),
    ],
)
def test_a_bad_period_is_refused_naming_its_index(given: object, field: str) -> None:
    with pytest.raises(SeriesError) as caught:
        parse_series([1.0] * 100, start="2025-01-06", frequency="h", seasonal_period=given)  # type: ignore[arg-type]
    assert caught.value.problems[0].field == field
