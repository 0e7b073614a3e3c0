"""Regular time grids built with array arithmetic instead of ``pandas.date_range``.

``date_range`` steps month-, quarter-, year- and week-anchored offsets one date at a time
in Python, most of a cached answer's time (tests/benchmarks/RESULTS.md). On
such a grid every step is a whole number of calendar months (or of 7 days), so the grid is
a vector sum in numpy. Only naive and UTC timestamps take this path: a zone with daylight
saving moves wall-clock steps in UTC, and there ``date_range`` is kept. The result equals
``date_range(start=first, periods=n, freq=offset)``, its ``freq`` included.
"""

from __future__ import annotations

import datetime as dt

import numpy as np
import pandas as pd
from pandas.tseries import offsets

# Calendar months per step of each month-anchored offset with n = 1.
_MONTHS: dict[type[pd.DateOffset], int] = {
    offsets.MonthBegin: 1,
    offsets.MonthEnd: 1,
    offsets.QuarterBegin: 3,
    offsets.QuarterEnd: 3,
    offsets.YearBegin: 12,
    offsets.YearEnd: 12,
}
_ENDS = (offsets.MonthEnd, offsets.QuarterEnd, offsets.YearEnd)


def regular_grid(first: pd.Timestamp, periods: int, offset: pd.DateOffset) -> pd.DatetimeIndex:
    """``periods`` timestamps from ``first`` (already on ``offset``) stepping by ``offset``."""
    values = _arithmetic(first, periods, offset)
    if values is None:
        return pd.date_range(start=first, periods=periods, freq=offset)
    index = pd.DatetimeIndex(values)
    if first.tz is not None:
        index = index.tz_localize("UTC").tz_convert(first.tz)
    try:
        # Setting freq through the constructor re-derives the grid to validate it, which is
        # the cost avoided here; the grid is correct by construction (tests/core/data).
        return index._with_freq(offset)
    except (AttributeError, TypeError, ValueError):
        return pd.DatetimeIndex(index, freq=offset)


def _arithmetic(first: pd.Timestamp, periods: int, offset: pd.DateOffset) -> np.ndarray | None:
    """The grid's values as naive (UTC) datetime64, or None where ``date_range`` must do it."""
    if first.tz is not None and first.utcoffset() != dt.timedelta(0):
        return None
    if offset.n < 1 or periods < 1 or not offset.is_on_offset(first):
        return None
    unit = first.unit
    naive = first.tz_localize(None) if first.tz is not None else first
    steps = np.arange(periods)
    kind = type(offset)
    if kind in _MONTHS and not getattr(offset, "normalize", False):
        time_of_day = np.timedelta64(naive - naive.normalize()).astype(f"timedelta64[{unit}]")
        month = np.datetime64(f"{naive.year:04d}-{naive.month:02d}", "M")
        months = month + steps * (offset.n * _MONTHS[kind])
        if kind in _ENDS:
            days = (months + 1).astype("datetime64[D]") - np.timedelta64(1, "D")
        else:
            days = months.astype("datetime64[D]")
        return days.astype(f"datetime64[{unit}]") + time_of_day
    if kind is offsets.Week and offset.weekday is not None and not offset.normalize:
        step = np.timedelta64(7 * offset.n, "D").astype(f"timedelta64[{unit}]")
        return np.datetime64(naive.to_datetime64(), unit) + steps * step
    return None


def future_index(index: pd.DatetimeIndex, horizon: int) -> pd.DatetimeIndex:
    """The ``horizon`` timestamps that continue a regular index at its frequency."""
    freq = index.freq
    if freq is None:
        raise ValueError("the series index has no frequency; parse it with core.series first")
    # By array arithmetic where it can, as regular_grid: equal to date_range, and a backtest
    # asks for one at every origin of every candidate.
    return regular_grid(index[-1] + freq, horizon, freq)


def index_after(index: pd.DatetimeIndex, origin: int, horizon: int) -> pd.DatetimeIndex:
    """``future_index(index[:origin], horizon)``: the index's own stamps where it has them (an
    index with a frequency lies on that grid), continued by ``future_index`` past its end. A
    backtest asks for one at every origin of every candidate."""
    if index.freq is not None and origin + horizon <= len(index):
        return index[origin : origin + horizon]
    return future_index(index[:origin], horizon)
