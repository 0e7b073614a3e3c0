"""Timestamps and the regular grid they lie on: ISO 8601 parsing, order, frequency inference,
the grid's size before it is built, and the supported date range."""

from __future__ import annotations

import re
import warnings
from collections.abc import Sequence
from typing import Any

import numpy as np
import pandas as pd

from service.core.data.frequency import frequency_name, parse_frequency, step_of
from service.core.data.grid import regular_grid
from service.core.errors import RequestError, SeriesError

# pandas also reads words such as "now" and "today"; ISO 8601 starts with a four-digit year.
_ISO_START = re.compile(r"^\d{4}")
# Bounds checked before any work (the API states them in its schema): an ISO 8601 date-time
# with a fraction and an offset has ~35 characters; a long one is slow to parse.
TIMESTAMP_CHARACTERS = 64
# Timestamps, grids and forecast horizons stay inside pandas' nanosecond range, which the
# cache keys and the statistics use.
EARLIEST = pd.Timestamp("1678-01-01")
LATEST = pd.Timestamp("2261-12-31")


def build_index(
    n: int,
    timestamps: Sequence[Any] | None,
    start: Any,
    frequency: str | None,
    max_points: int = 100_000,
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
        _check_span(first, first, offset, n, "start")
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
        # The grid between the first and last timestamps is sized before it is built: three
        # timestamps 500 years apart at PT1M once expanded to 260 million points.
        steps = grid_length(index[0], index[-1], offset)
        if steps > max_points:
            raise SeriesError(
                f"the timestamps span about {steps} steps of {frequency_name(offset)}; "
                f"the limit is {max_points} points",
                field="frequency",
            )
    else:
        offset = _infer(index)
    return _with_grid_check(index, offset)


def grid_length(first: pd.Timestamp, last: pd.Timestamp, offset: pd.DateOffset) -> int:
    """How many points a regular grid from ``first`` to ``last`` has, computed without
    building it (exact for clock steps and months, within one for weeks and business days)."""
    step = step_of(offset)
    if step is None:
        raise SeriesError(f"unsupported frequency {frequency_name(offset)}", field="frequency")
    if step.unit == "months":
        months = (last.year - first.year) * 12 + (last.month - first.month)
        return months // step.count + 1
    seconds = (last - first).total_seconds()
    if step.unit == "weeks":
        return int(seconds // (7 * 86400 * step.count)) + 1
    if step.unit == "business_days":
        return int(seconds / 86400 * 5 / 7) // step.count + 2
    return int(seconds // step.count) + 1


def _check_span(
    first: pd.Timestamp, last: pd.Timestamp, offset: pd.DateOffset, extra: int, field: str
) -> None:
    """``last`` plus ``extra`` steps stays inside the supported range (before building)."""
    span = nominal_seconds(offset) * max(extra - 1, 0)  # seconds; may exceed any Timedelta
    if _naive(first) < EARLIEST or span > (LATEST - _naive(last)).total_seconds():
        raise SeriesError(
            f"the series must lie between {EARLIEST.year} and {LATEST.year} (starting at "
            f"{first.isoformat()}, {extra} steps of {frequency_name(offset)} leave that range)",
            field=field,
        )


def _naive(stamp: pd.Timestamp) -> pd.Timestamp:
    """The wall-clock time of ``stamp`` in UTC, without a zone, for range comparisons."""
    return stamp.tz_convert(None) if stamp.tzinfo is not None else stamp


def check_horizon_in_range(index: pd.DatetimeIndex, horizon: int, field: str = "horizon") -> None:
    """A forecast ``horizon`` steps past the series stays inside the supported range."""
    try:
        _check_span(index[-1], index[-1], index.freq, horizon + 1, field)
    except SeriesError as exc:
        raise RequestError(
            f"{horizon} steps past {index[-1].isoformat()} leave the supported range "
            f"({EARLIEST.year}-{LATEST.year})",
            field=field,
        ) from exc


def _parse_one(text: Any, field: str) -> pd.Timestamp:
    _check_text(text, field)
    try:
        stamp = pd.Timestamp(text)
    except (ValueError, TypeError, OverflowError) as exc:
        raise SeriesError(
            f"{_excerpt(text)} is not an ISO 8601 date or date-time", field=field
        ) from exc
    if stamp is pd.NaT:
        raise SeriesError(f"{_excerpt(text)} is not a timestamp", field=field)
    _check_in_range(stamp, field)
    return stamp


def _check_text(text: Any, field: str) -> None:
    """A string of at most TIMESTAMP_CHARACTERS that starts like ISO 8601 (a year)."""
    if not isinstance(text, str):
        raise SeriesError("must be an ISO 8601 date or date-time string", field=field)
    if len(text) > TIMESTAMP_CHARACTERS:
        raise SeriesError(
            f"has {len(text)} characters; an ISO 8601 timestamp has at most {TIMESTAMP_CHARACTERS}",
            field=field,
        )
    if not _ISO_START.match(text):
        raise SeriesError(f"{_excerpt(text)} is not an ISO 8601 date or date-time", field=field)


def _check_in_range(stamp: pd.Timestamp, field: str) -> None:
    if not EARLIEST <= _naive(stamp) <= LATEST:
        raise SeriesError(
            f"{stamp.isoformat()} is outside the supported range "
            f"{EARLIEST.date().isoformat()} to {LATEST.date().isoformat()}",
            field=field,
        )


def _excerpt(text: str) -> str:
    """The caller's text quoted, cut short: a problem never echoes a long input."""
    return repr(text if len(text) <= 40 else text[:40] + "...")


def _parse_timestamps(timestamps: Sequence[Any]) -> pd.DatetimeIndex:
    for i, t in enumerate(timestamps):
        _check_text(t, f"timestamps[{i}]")
    try:
        index = pd.DatetimeIndex(pd.to_datetime(list(timestamps), format="ISO8601"))
    except (ValueError, TypeError, OverflowError):
        return _locate_bad_timestamp(timestamps)
    if index.hasnans:
        bad = int(np.flatnonzero(index.isna())[0])
        raise SeriesError("not a timestamp", field=f"timestamps[{bad}]")
    for position in (int(np.argmin(index.asi8)), int(np.argmax(index.asi8))):
        _check_in_range(index[position], f"timestamps[{position}]")
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


def nominal_seconds(offset: pd.DateOffset) -> float:
    """The typical length of one step, to compare steps of different units."""
    step = step_of(offset)
    if step is None:
        return 0.0
    nominal = {"months": 2_629_746, "weeks": 604_800, "business_days": 86_400, "seconds": 1}
    return float(nominal[step.unit] * step.count)
