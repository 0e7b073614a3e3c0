"""Seasonal periods: one or several per series, defaults by step, non-integer ones allowed.

Defaults by step, each kept only when the history holds at least two full cycles of it:

| step                 | periods           | cycles                                  |
| -------------------- | ----------------- | --------------------------------------- |
| hourly               | 24, 168           | day, week                               |
| half-hourly          | 48, 336           | day, week                               |
| n minutes            | 1440/n, 10080/n   | day, week (each where the step divides) |
| n hours              | 24/n, 168/n       | day, week (each where the step divides) |
| n seconds            | 60/n              | minute                                  |
| daily                | 7, 365.25         | week, year                              |
| business-daily       | 5                 | working week                            |
| weekly               | 52.18             | year (365.25 / 7)                       |
| n weeks              | 52/n              | year (where n divides 52)               |
| monthly              | 12                | year                                    |
| quarterly            | 4                 | year                                    |
| yearly, n days       | none              |                                         |

Non-integer periods reach the models that take Fourier terms (harmonic regression) as they
are; models with a whole-number season use the nearest whole number.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from typing import Any

import pandas as pd

from service.core.data.frequency import step_of
from service.core.errors import FieldProblem, SeriesError

MAX_PERIODS = 5
# The longest period: the largest series any setting accepts (twice it overflowed a float).
MAX_PERIOD = 10_000_000
PERIODS_BY_STEP: tuple[dict[str, Any], ...] = (
    {"step": "hourly", "periods": [24, 168], "cycles": "day, week"},
    {"step": "half-hourly", "periods": [48, 336], "cycles": "day, week"},
    {"step": "n minutes", "periods": ["1440/n", "10080/n"], "cycles": "day, week"},
    {"step": "n hours", "periods": ["24/n", "168/n"], "cycles": "day, week"},
    {"step": "n seconds", "periods": ["60/n"], "cycles": "minute"},
    {"step": "daily", "periods": [7, 365.25], "cycles": "week, year"},
    {"step": "business-daily", "periods": [5], "cycles": "working week"},
    {"step": "weekly", "periods": [52.18], "cycles": "year"},
    {"step": "n weeks", "periods": ["52/n"], "cycles": "year"},
    {"step": "monthly", "periods": [12], "cycles": "year"},
    {"step": "quarterly", "periods": [4], "cycles": "year"},
    {"step": "yearly, n days", "periods": [], "cycles": "none"},
)
"""The table above for the catalogue (a period as text where it depends on the step's n;
each is used only where the step divides the cycle)."""
YEAR_DAYS = 365.25
WEEKS_PER_YEAR = round(YEAR_DAYS / 7, 2)


def period_text(period: float) -> str:
    """24 for a whole number, 365.25 otherwise (for labels and messages)."""
    return str(int(period)) if float(period).is_integer() else f"{period:g}"


def check_periods(value: Any, field: str) -> tuple[float, ...]:
    """1 (no season) or a number >= 2, or a list of distinct numbers >= 2 (a cycle spans two
    steps at least); sorted, as floats.

    Problems name the entry (``seasonal_period[1]``)."""
    if isinstance(value, bool) or value is None:
        raise SeriesError("seasonal_period must be a number or a list of numbers", field=field)
    if isinstance(value, (int, float)):
        if not isinstance(value, int) and not float(value).is_integer():
            items: Sequence[Any] = [value]
        else:
            if value < 1:
                raise SeriesError("seasonal_period must be >= 1", field=field)
            if value > MAX_PERIOD:
                raise SeriesError(f"seasonal_period must be at most {MAX_PERIOD}", field=field)
            return () if value == 1 else (float(value),)
    elif isinstance(value, Sequence) and not isinstance(value, (str, bytes)):
        items = value
        if not items:
            raise SeriesError("seasonal_period must list at least one period", field=field)
        if len(items) > MAX_PERIODS:
            raise SeriesError(
                f"seasonal_period lists {len(items)} periods; at most {MAX_PERIODS}", field=field
            )
    else:
        raise SeriesError("seasonal_period must be a number or a list of numbers", field=field)
    problems: list[FieldProblem] = []
    out: list[float] = []
    single = not isinstance(value, Sequence)
    for i, v in enumerate(items):
        where = field if single else f"{field}[{i}]"
        if isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(v):
            problems.append(FieldProblem(where, "must be a finite number"))
        elif v < 2:
            problems.append(FieldProblem(where, f"must be at least 2 (steps per cycle); got {v}"))
        elif v > MAX_PERIOD:
            problems.append(FieldProblem(where, f"must be at most {MAX_PERIOD}; got {v:g}"))
        elif float(v) in out:
            problems.append(FieldProblem(where, f"repeats the period {period_text(float(v))}"))
        else:
            out.append(float(v))
    if problems:
        raise SeriesError(problems[0].message, problems=problems)
    return tuple(sorted(out))


def whole_period(periods: Sequence[float]) -> int:
    """The whole-number period of the single-season models: the shortest, rounded (1: none)."""
    return round(min(periods)) if periods else 1


def too_long_periods(periods: Sequence[float], observations: int) -> list[tuple[float, int]]:
    """The periods the history holds fewer than two full cycles of, each with the points it
    needs (the rule of the defaults above): the models and the diagnostics leave them out."""
    return [(p, math.ceil(2 * p)) for p in periods if observations < 2 * p]


def default_periods(offset: pd.DateOffset, observations: int) -> tuple[float, ...]:
    """The table above, keeping the periods with at least two full cycles of history."""
    return tuple(p for p in usual_periods(offset) if observations >= 2 * p)


def usual_periods(offset: pd.DateOffset) -> tuple[float, ...]:
    """The cycles a series at this step usually repeats, before the history-length rule."""
    step = step_of(offset)
    if step is None:
        return ()
    if step.unit == "months":
        return _whole(12, step.count)
    if step.unit == "weeks":
        return (WEEKS_PER_YEAR,) if step.count == 1 else _whole(52, step.count)
    if step.unit == "business_days":
        return (5.0,) if step.count == 1 else ()
    seconds = step.count
    if seconds == 86400:
        return (7.0, YEAR_DAYS)
    if seconds < 60:
        return _whole(60, seconds)
    if seconds < 86400:
        return _whole(86400, seconds) + _whole(7 * 86400, seconds)
    return ()


_CYCLE_SECONDS = (
    (60.0, "minute-long"),
    (3600.0, "hourly"),
    (86400.0, "daily"),
    (7 * 86400.0, "weekly"),
    (YEAR_DAYS * 86400.0, "yearly"),
)


def cycle_name(period: float, offset: pd.DateOffset | None) -> str | None:
    """The cycle's everyday name at this step ("daily" for 24 hourly steps, "yearly" for 52.18
    weeks or 365 days), within 1 %; None when it is no calendar cycle."""
    step = None if offset is None else step_of(offset)
    if step is None:
        return None
    if step.unit == "months":
        return "yearly" if math.isclose(period * step.count, 12, rel_tol=0.01) else None
    if step.unit == "business_days":
        return "weekly" if math.isclose(period * step.count, 5, rel_tol=0.01) else None
    length = period * step.count * (7 * 86400 if step.unit == "weeks" else 1)
    for seconds, name in _CYCLE_SECONDS:
        if math.isclose(length, seconds, rel_tol=0.01):
            return name
    return None


def _whole(cycle: int, count: int) -> tuple[float, ...]:
    return (float(cycle // count),) if cycle % count == 0 and cycle // count > 1 else ()
