"""Frequencies: ISO 8601 durations and pandas aliases to offsets, and their steps.

The default seasonal periods of each step are in ``periods.py``.

Spellings people write, beside ISO 8601 durations and the current pandas aliases: the
aliases recent pandas versions renamed or removed are read as the steps they meant, in
either case, with an optional multiple and anchor: ``M`` month end (``ME``), ``Q`` quarter
end (``QE-DEC``), ``Y`` and ``A`` year end (``YE-DEC``), ``AS`` year start (``YS-JAN``), ``H``
hour (``h``), ``T`` minute (``min``), ``S`` second (``s``); so ``3M``, ``15T``, ``Q-JUN``,
``a-dec``. The canonical alias is what responses echo. Steps shorter than a second are not
supported; a multiple has at most six digits.
"""

from __future__ import annotations

import re
from dataclasses import dataclass

import pandas as pd
from pandas.tseries import offsets
from pandas.tseries.frequencies import to_offset

from service.core.errors import SeriesError

_ISO_DURATION = re.compile(
    r"^P(?:(?P<years>\d+)Y)?(?:(?P<months>\d+)M)?(?:(?P<weeks>\d+)W)?(?:(?P<days>\d+)D)?"
    r"(?:T(?:(?P<hours>\d+)H)?(?:(?P<minutes>\d+)M)?(?:(?P<seconds>\d+)S)?)?$"
)

_WEEKDAYS = ("MON", "TUE", "WED", "THU", "FRI", "SAT", "SUN")

# Legacy and lower-case spellings -> the current pandas alias (see the module docstring).
_SPELLINGS = {
    "M": "ME",
    "Q": "QE",
    "Y": "YE",
    "A": "YE",
    "AS": "YS",
    "H": "h",
    "T": "min",
    "S": "s",
    "D": "D",
    "W": "W",
    "B": "B",
}
_ALIAS = re.compile(r"^(?P<count>\d{1,6})?(?P<unit>[A-Za-z]{1,3})(?:-(?P<anchor>[A-Za-z]{3}))?$")
_MULTIPLE = re.compile(r"^\d{7,}")


@dataclass(frozen=True)
class Step:
    """A regular step reduced to one unit: months, weeks, days, business days or seconds."""

    unit: str
    count: int


def parse_frequency(text: str, first: pd.Timestamp | None, field: str) -> pd.DateOffset:
    """An offset from an ISO 8601 duration (``P1W``) or a pandas alias (``W-MON``).

    Durations are anchored on the first timestamp: ``P1M`` on a month start is ``MS``, on a
    month end ``ME``; ``P1W`` is ``W-<weekday of the first timestamp>``.
    """
    if not isinstance(text, str) or not text.strip():
        raise SeriesError("frequency must be a non-empty string", field=field)
    text = text.strip()
    if text.startswith("P"):
        return _from_duration(text, first, field)
    if _MULTIPLE.match(text):
        raise SeriesError("the frequency's multiple has more than six digits", field=field)
    try:
        offset = to_offset(_current_alias(text))
    except (ValueError, TypeError, OverflowError) as exc:
        raise SeriesError(
            f"unknown frequency {_excerpt(text)}: give an ISO 8601 duration such as P1D, P1W, "
            "P1M, PT1H, or an alias such as D, W-MON, MS, M, Q, Y, h, min, s",
            field=field,
        ) from exc
    if offset is None or step_of(offset) is None:
        raise SeriesError(
            f"unsupported frequency {_excerpt(text)} (steps of a second or longer only)",
            field=field,
        )
    return offset


def _excerpt(text: str) -> str:
    """The caller's text quoted, cut short: a problem never echoes a long input."""
    return repr(text if len(text) <= 40 else text[:40] + "...")


def _current_alias(text: str) -> str:
    """``3M`` -> ``3ME``, ``q-jun`` -> ``QE-JUN``, ``15T`` -> ``15min``; other text unchanged."""
    match = _ALIAS.match(text)
    if match is None:
        return text
    unit = _SPELLINGS.get(match["unit"]) or _SPELLINGS.get(match["unit"].upper())
    if unit is None or (match["unit"] in ("ms", "MS")):
        return text  # a current alias (or ms/MS, which differ by case), for pandas to read
    anchor = f"-{match['anchor'].upper()}" if match["anchor"] else ""
    return f"{match['count'] or ''}{unit}{anchor}"


def _from_duration(text: str, first: pd.Timestamp | None, field: str) -> pd.DateOffset:
    match = _ISO_DURATION.match(text)
    parts = {k: int(v) for k, v in (match.groupdict().items() if match else []) if v}
    if not match or not parts or not any(parts.values()):
        raise SeriesError(f"invalid ISO 8601 duration {_excerpt(text)}", field=field)
    if any(len(v) > 6 for v in match.groupdict().values() if v):
        raise SeriesError("a duration's numbers have at most six digits", field=field)
    calendar = {k for k in ("years", "months", "weeks") if k in parts}
    clock = {k for k in ("days", "hours", "minutes", "seconds") if k in parts}
    if len(calendar) > 1 or (calendar and clock):
        raise SeriesError(
            f"duration {text!r} mixes calendar units; use one unit such as P3M or PT36H",
            field=field,
        )
    if "years" in parts or "months" in parts:
        months = parts.get("years", 0) * 12 + parts.get("months", 0)
        return _monthly(months, first)
    if "weeks" in parts:
        weekday = _WEEKDAYS[first.weekday()] if first is not None else "SUN"
        return to_offset(f"{parts['weeks']}W-{weekday}")
    seconds = (
        parts.get("days", 0) * 86400
        + parts.get("hours", 0) * 3600
        + parts.get("minutes", 0) * 60
        + parts.get("seconds", 0)
    )
    if seconds % 86400 == 0:
        return to_offset(f"{seconds // 86400}D")
    if seconds % 3600 == 0:
        return to_offset(f"{seconds // 3600}h")
    if seconds % 60 == 0:
        return to_offset(f"{seconds // 60}min")
    return to_offset(f"{seconds}s")


def _monthly(months: int, first: pd.Timestamp | None) -> pd.DateOffset:
    months_names = (
        "JAN",
        "FEB",
        "MAR",
        "APR",
        "MAY",
        "JUN",
        "JUL",
        "AUG",
        "SEP",
        "OCT",
        "NOV",
        "DEC",
    )
    if first is not None and months % 12 == 0 and (first.is_month_start or first.is_month_end):
        anchor = "YS" if first.is_month_start else "YE"
        return to_offset(f"{months // 12}{anchor}-{months_names[first.month - 1]}")
    if first is None or first.is_month_start:
        return to_offset(f"{months}MS")
    if first.is_month_end:
        return to_offset(f"{months}ME")
    return pd.DateOffset(months=months)


def step_of(offset: pd.DateOffset) -> Step | None:
    """The step of an offset in one unit, or None for offsets Windvane does not support."""
    n = int(offset.n)
    if n < 1:
        return None
    if isinstance(offset, (offsets.MonthBegin, offsets.MonthEnd)):
        return Step("months", n)
    if isinstance(offset, (offsets.QuarterBegin, offsets.QuarterEnd)):
        return Step("months", 3 * n)
    if isinstance(offset, (offsets.YearBegin, offsets.YearEnd)):
        return Step("months", 12 * n)
    if isinstance(offset, offsets.Week):
        return Step("weeks", n)
    if isinstance(offset, offsets.BusinessDay):
        return Step("business_days", n)
    if isinstance(offset, offsets.Day):
        return Step("seconds", 86400 * n)
    if isinstance(offset, offsets.Tick):
        seconds = pd.Timedelta(offset).total_seconds()
        # Sub-second steps (ms, us, ns) are not supported: the defaults divide by seconds.
        return Step("seconds", int(seconds)) if seconds >= 1 and seconds.is_integer() else None
    if type(offset) is pd.DateOffset:
        kwds = offset.kwds
        if set(kwds) == {"months"}:
            return Step("months", n * int(kwds["months"]))
        if set(kwds) == {"years"}:
            return Step("months", 12 * n * int(kwds["years"]))
    return None


def frequency_name(offset: pd.DateOffset) -> str:
    """The pandas alias of an offset (``W-MON``, ``MS``, ``h``), or an ISO 8601 duration."""
    if type(offset) is pd.DateOffset:
        step = step_of(offset)
        if step is not None:
            return f"P{step.count}M"
    return str(offset.freqstr)
