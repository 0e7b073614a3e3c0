"""Parse a series from its wire form into a regular ``pandas.Series``, or say precisely why not.

Two forms: ``timestamps`` + ``values`` (frequency given or inferred), or ``start`` +
``frequency`` + ``values``; the timestamps and their grid are read by ``timestamps.py``.
Gaps on a declared frequency's grid become missing values; the ``missing`` policy then
interpolates them (linear in position, edges held at the nearest observation), keeps them as
NaN, or refuses the series. Values are checked here.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any, Literal

import numpy as np
import pandas as pd

from service.core.data.filling import interpolate_gaps
from service.core.data.frequency import frequency_name, parse_frequency
from service.core.data.periods import check_periods, default_periods, whole_period
from service.core.data.timestamps import build_index, nominal_seconds
from service.core.errors import FieldProblem, SeriesError

MissingPolicy = Literal["interpolate", "keep", "error"]
AggregateMethod = Literal["sum", "mean", "last"]
MISSING_POLICIES: tuple[str, ...] = ("interpolate", "keep", "error")
AGGREGATE_METHODS: tuple[str, ...] = ("sum", "mean", "last")
# Values beyond this overflow float64 in squares and sums of squares over long series
# (ADF at +-1e308 raised; 1e300 gave infinite bounds).
VALUE_MAGNITUDE = 1e30


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
    seasonal_periods: tuple[float, ...] = ()
    """Every seasonal period in use, shortest first; ``seasonal_period`` is the shortest,
    rounded, for the models with one whole-number season (1 when there is none)."""

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
    seasonal_period: float | Sequence[float] | None = None,
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
    index, grid = build_index(raw.size, timestamps, start, frequency, max_points)
    y = pd.Series(raw, index=index, name=name, dtype="float64")
    filled = len(grid) - len(index)
    if filled:
        y = y.reindex(grid)
    y.index = grid
    if aggregate is not None:
        y = _aggregate(y, aggregate, grid.freq)
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
    periods = _seasonal_periods(seasonal_period, y.index.freq, y.size)
    return ParsedSeries(
        y=y,
        frequency=frequency_name(y.index.freq),
        seasonal_period=whole_period(periods),
        seasonal_periods=periods,
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
        if math.isfinite(f) and abs(f) > VALUE_MAGNITUDE:
            problems.append(FieldProblem(f"values[{i}]", f"must lie within ±{VALUE_MAGNITUDE:g}"))
            continue
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


def _aggregate(y: pd.Series, aggregate: Aggregation, own: pd.DateOffset) -> pd.Series:
    offset = parse_frequency(aggregate.frequency, None, "aggregate.frequency")
    if nominal_seconds(offset) < nominal_seconds(own):
        # A finer step would expand the series many times over: refused.
        raise SeriesError(
            f"aggregate.frequency {frequency_name(offset)} is finer than the series' own "
            f"step {frequency_name(own)}; aggregation only makes a series coarser",
            field="aggregate.frequency",
        )
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
    filled = pd.Series(interpolate_gaps(y.to_numpy(dtype=float)), index=y.index, name=y.name)
    filled.index.freq = y.index.freq
    return filled


def _seasonal_periods(
    given: float | Sequence[float] | None, offset: pd.DateOffset, observations: int
) -> tuple[float, ...]:
    """The periods asked for, or the step's defaults that fit twice into the history."""
    if given is None:
        return default_periods(offset, observations)
    return check_periods(given, "seasonal_period")
