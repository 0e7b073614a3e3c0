"""Parse a series from its wire form into a regular ``pandas.Series``, or say precisely why not.

Two forms: ``timestamps`` + ``values`` (frequency given or inferred), or ``start`` +
``frequency`` + ``values``. Gaps on a declared frequency's grid become missing values; the
``missing`` policy then interpolates them (linear in position, edges filled from the nearest
observation), keeps them as NaN, or refuses the series.
"""

from __future__ import annotations

import math
import re
import warnings
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any, Literal

import numpy as np
import pandas as pd

from service.core.data.frequency import default_seasonal_period, frequency_name, parse_frequency
from service.core.data.grid import regular_grid
from service.core.errors import FieldProblem, SeriesError

MissingPolicy = Literal["interpolate", "keep", "error"]
AggregateMethod = Literal["sum", "mean", "last"]
MISSING_POLICIES: tuple[str, ...] = ("interpolate", "keep", "error")
AGGREGATE_METHODS: tuple[str, ...] = ("sum", "mean", "last")
# pandas also reads words such as "now" and "today"; ISO 8601 starts with a four-digit year.
_ISO_START = re.compile(r"^\d{4}")


@dataclass(frozen=True)
class Aggregation:
    """Regularise to a coarser frequency by summing, averaging or taking the last value."""

    frequency: str
    method: AggregateMethod = "sum"


@dataclass(frozen=True)
class ParsedSeries:
    """A regular series ready for the statistics, with what parsing had to do to it."""

    y: pd.Series
    frequency: str
    seasonal_period: int
    name: str | None
    missing_count: int
    filled_gaps: int
    interpolated: int

    @property
    def offset(self) -> pd.DateOffset:
        """The index's frequency as a pandas offset."""
        return self.y.index.freq


def parse_series(
    values: Sequence[Any] | None,
    *,
    timestamps: Sequence[Any] | None = None,
    start: Any = None,
    frequency: str | None = None,
    seasonal_period: int | None = None,
    name: str | None = None,
    missing: str = "interpolate",
    aggregate: Aggregation | None = None,
    min_points: int = 3,
    max_points: int = 100_000,
) -> ParsedSeries:
    """Validate and regularise one series; raise SeriesError naming the field and index."""
    if missing not in MISSING_POLICIES:
        raise SeriesError(f"missing must be one of {', '.join(MISSING_POLICIES)}", field="missing")
    raw = _check_values(values, max_points)
    index, grid = _build_index(raw.size, timestamps, start, frequency)
    y = pd.Series(raw, index=index, name=name, dtype="float64")
    filled = len(grid) - len(index)
    if filled:
        y = y.reindex(grid)
    y.index = grid
    if aggregate is not None:
        y = _aggregate(y, aggregate)
    missing_count = int(y.isna().sum())
    if missing_count == y.size:
        raise SeriesError("every value is missing", field="values")
    interpolated = 0
    if missing_count:
        if missing == "error":
            first = int(np.flatnonzero(y.isna().to_numpy())[0])
            raise SeriesError(
                f"value at {y.index[first].isoformat()} is missing and missing is 'error'",
                field=_missing_field(first, filled, raw),
            )
        if missing == "interpolate":
            y = _interpolate(y)
            interpolated = missing_count
    if y.size < min_points:
        raise SeriesError(
            f"the series has {y.size} points; at least {min_points} are needed", field="values"
        )
    period = _seasonal_period(seasonal_period, y.index.freq)
    return ParsedSeries(
        y=y,
        frequency=frequency_name(y.index.freq),
        seasonal_period=period,
        name=name,
        missing_count=missing_count,
        filled_gaps=filled,
        interpolated=interpolated,
    )


def _missing_field(position: int, filled: int, raw: np.ndarray) -> str:
    """Name the null in values, or the timestamps when the gap came from the grid."""
    return "timestamps" if filled else f"values[{position}]"


def _check_values(values: Sequence[Any] | None, max_points: int) -> np.ndarray:
    if values is None:
        raise SeriesError("values are required", field="values")
    if isinstance(values, (str, bytes)) or not isinstance(values, Sequence):
        raise SeriesError("values must be a list of numbers or nulls", field="values")
    if len(values) == 0:
        raise SeriesError("the series is empty", field="values")
    if len(values) > max_points:
        raise SeriesError(
            f"the series has {len(values)} points; the limit is {max_points}", field="values"
        )
    out = np.empty(len(values), dtype="float64")
    problems: list[FieldProblem] = []
    for i, v in enumerate(values):
        if v is None:
            out[i] = np.nan
            continue
        if isinstance(v, bool) or not isinstance(v, (int, float)):
            problems.append(
                FieldProblem(f"values[{i}]", f"must be a number or null, got {type(v).__name__}")
            )
            continue
        try:
            f = float(v)
        except OverflowError:
            f = math.inf
        if not math.isfinite(f):
            problems.append(
                FieldProblem(
                    f"values[{i}]",
                    "must be finite (NaN, Infinity and overflowing "
                    "numbers are refused; send null for a missing value)",
                )
            )
            continue
        out[i] = f
        if len(problems) >= 20:
            break
    if problems:
        raise SeriesError(
            f"{len(problems)} invalid value(s); first at {problems[0].field}", problems=problems
        )
    return out


def _build_index(
    n: int, timestamps: Sequence[Any] | None, start: Any, frequency: str | None
) -> tuple[pd.DatetimeIndex, pd.DatetimeIndex]:
    """The timestamps as given and the regular grid they lie on (equal when no gaps)."""
    if timestamps is not None and start is not None:
        raise SeriesError("give either timestamps or start, not both", field="start")
    if timestamps is None and start is None:
        raise SeriesError("give timestamps, or start with frequency", field="timestamps")
    if timestamps is None:
        first = _parse_one(start, "start")
        if frequency is None:
            raise SeriesError("frequency is required with start", field="frequency")
        offset = parse_frequency(frequency, first, "frequency")
        _check_anchor(first, offset, "start")
        grid = regular_grid(first, n, offset)
        return grid, grid
    if isinstance(timestamps, (str, bytes)) or not isinstance(timestamps, Sequence):
        raise SeriesError("timestamps must be a list of ISO 8601 strings", field="timestamps")
    if len(timestamps) != n:
        raise SeriesError(
            f"timestamps has {len(timestamps)} entries but values has {n}", field="timestamps"
        )
    index = _parse_timestamps(timestamps)
    _check_order(index)
    if frequency is not None:
        offset = parse_frequency(frequency, index[0], "frequency")
        _check_anchor(index[0], offset, "timestamps[0]")
    else:
        offset = _infer(index)
    return _with_grid_check(index, offset)


def _parse_one(text: Any, field: str) -> pd.Timestamp:
    if not isinstance(text, str):
        raise SeriesError("must be an ISO 8601 date or date-time string", field=field)
    if not _ISO_START.match(text):
        raise SeriesError(f"{text!r} is not an ISO 8601 date or date-time", field=field)
    try:
        stamp = pd.Timestamp(text)
    except (ValueError, TypeError, OverflowError) as exc:
        raise SeriesError(f"{text!r} is not an ISO 8601 date or date-time", field=field) from exc
    if stamp is pd.NaT:
        raise SeriesError(f"{text!r} is not a timestamp", field=field)
    return stamp


def _parse_timestamps(timestamps: Sequence[Any]) -> pd.DatetimeIndex:
    for i, t in enumerate(timestamps):
        if not isinstance(t, str):
            raise SeriesError(
                "must be an ISO 8601 date or date-time string", field=f"timestamps[{i}]"
            )
        if not _ISO_START.match(t):
            raise SeriesError(
                f"{t!r} is not an ISO 8601 date or date-time", field=f"timestamps[{i}]"
            )
    try:
        index = pd.DatetimeIndex(pd.to_datetime(list(timestamps), format="ISO8601"))
    except (ValueError, TypeError, OverflowError):
        return _locate_bad_timestamp(timestamps)
    if index.hasnans:
        bad = int(np.flatnonzero(index.isna())[0])
        raise SeriesError("not a timestamp", field=f"timestamps[{bad}]")
    return index


def _locate_bad_timestamp(timestamps: Sequence[Any]) -> pd.DatetimeIndex:
    """Find the first entry that cannot be parsed, or that mixes offsets, and name it."""
    first_offset: object = "unset"
    for i, t in enumerate(timestamps):
        stamp = _parse_one(t, f"timestamps[{i}]")
        offset = stamp.utcoffset()
        if first_offset == "unset":
            first_offset = offset
        elif offset != first_offset:
            raise SeriesError(
                "timestamps mix UTC offsets (or mix aware and naive times); send them all "
                "with one offset",
                field=f"timestamps[{i}]",
            )
    raise SeriesError("timestamps could not be parsed as ISO 8601", field="timestamps")


def _check_order(index: pd.DatetimeIndex) -> None:
    steps = np.diff(index.asi8)
    if steps.size and (steps <= 0).any():
        i = int(np.flatnonzero(steps <= 0)[0]) + 1
        what = "duplicates" if steps[i - 1] == 0 else "is earlier than"
        raise SeriesError(
            f"timestamps[{i}] {what} timestamps[{i - 1}]; timestamps must be strictly increasing",
            field=f"timestamps[{i}]",
        )


def _infer(index: pd.DatetimeIndex) -> pd.DateOffset:
    if index.size < 3:
        raise SeriesError(
            "frequency cannot be inferred from fewer than three timestamps; give frequency",
            field="frequency",
        )
    with warnings.catch_warnings():
        # pandas 3 warns that infer_freq will return an offset instead of a string; both
        # forms are read below, so the announcement is not a problem of this request.
        warnings.simplefilter("ignore", DeprecationWarning)
        inferred = pd.infer_freq(index)
    alias = inferred if inferred is None or isinstance(inferred, str) else inferred.freqstr
    if alias is None:
        steps = np.diff(index.asi8)
        i = int(np.flatnonzero(steps != steps[0])[0]) + 1 if (steps != steps[0]).any() else 1
        raise SeriesError(
            f"timestamps are irregular: the step before timestamps[{i}] differs from the "
            "first step; give frequency to treat gaps as missing values",
            field=f"timestamps[{i}]",
        )
    return parse_frequency(alias, index[0], "frequency")


def _check_anchor(first: pd.Timestamp, offset: pd.DateOffset, field: str) -> None:
    if not offset.is_on_offset(first):
        raise SeriesError(
            f"{first.isoformat()} does not fall on frequency {frequency_name(offset)}", field=field
        )


def _with_grid_check(
    index: pd.DatetimeIndex, offset: pd.DateOffset
) -> tuple[pd.DatetimeIndex, pd.DatetimeIndex]:
    grid = regular_grid(index[0], len(index), offset)
    if not grid.equals(index):  # gaps: the grid runs from the first timestamp to the last
        grid = pd.date_range(start=index[0], end=index[-1], freq=offset)
    position = grid.get_indexer(index)
    if (position < 0).any():
        i = int(np.flatnonzero(position < 0)[0])
        raise SeriesError(
            f"timestamps[{i}] = {index[i].isoformat()} is not on the "
            f"{frequency_name(offset)} grid that starts at "
            f"{index[0].isoformat()}",
            field=f"timestamps[{i}]",
        )
    return index, grid


def _aggregate(y: pd.Series, aggregate: Aggregation) -> pd.Series:
    offset = parse_frequency(aggregate.frequency, None, "aggregate.frequency")
    if aggregate.method not in AGGREGATE_METHODS:
        raise SeriesError(
            f"aggregate.method must be one of {', '.join(AGGREGATE_METHODS)}",
            field="aggregate.method",
        )
    bins = y.resample(offset, closed="left", label="left")
    if aggregate.method == "sum":
        out = bins.sum(min_count=1)
    elif aggregate.method == "mean":
        out = bins.mean()
    else:
        out = bins.last()
    out.index.freq = offset
    return out.astype("float64")


def _interpolate(y: pd.Series) -> pd.Series:
    filled = y.interpolate(method="linear", limit_direction="both")
    filled.index.freq = y.index.freq
    return filled


def _seasonal_period(given: int | None, offset: pd.DateOffset) -> int:
    if given is None:
        return default_seasonal_period(offset)
    if isinstance(given, bool) or not isinstance(given, int) or given < 1:
        raise SeriesError("seasonal_period must be a whole number >= 1", field="seasonal_period")
    return given
