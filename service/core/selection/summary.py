"""The plain one-sentence verdict every forecast response carries: is the series
forecastable, by how much the forecast beat the naive one in the backtest, and how far to
trust the interval (DESIGN: a summary a reporting system can show beside the number)."""

from __future__ import annotations

import math
from typing import Any

from service.core.data.periods import period_text
from service.core.selection.guard import BENCHMARK_GUARD, RANDOM_WALK_GUARD, benchmark_name


def _percent(value: float) -> str:
    return f"{100 * value:.0f} %"


def _kind(profile: Any, chosen: str) -> str:
    if profile.intermittent:
        return "Intermittent series"
    if profile.random_walk and chosen == "drift":
        # The random-walk guard delivered the drift forecast: say what the forecast is.
        return (
            "Random-walk-like series with a steady average step (forecast as the last value "
            "plus that step)"
        )
    if profile.random_walk:
        return "Random-walk-like series (hard to forecast beyond its last value)"
    several = tuple(getattr(profile, "seasonal_periods", ()))
    if len(several) > 1:
        return f"Seasonal series with cycles of {' and '.join(map(period_text, several))} steps"
    if profile.seasonal:
        return "Seasonal series"
    return "Non-seasonal series"


def auto_summary(selection: Any) -> str:
    """The verdict on an automatic forecast, from its ``selection`` record."""
    bench = benchmark_name(selection.benchmark)
    value = selection.skill_over_naive
    if value is None:
        told = f"its skill over {bench} could not be measured in a backtest"
    elif value <= 0 and selection.rule in (RANDOM_WALK_GUARD, BENCHMARK_GUARD):
        leans = "drift" if selection.chosen == "drift" else bench
        told = f"no model beat {bench} in backtests, so the forecast leans on {leans}"
    elif value <= 0:
        told = f"the forecast did not beat {bench} in backtests"
    else:
        told = f"the forecast beat {bench} by {_percent(value)} in backtests"
    kind = _kind(selection.profile, getattr(selection, "chosen", ""))
    return f"{kind}; {told}; {_coverage(selection.calibration)}."


def _coverage(calibration: Any) -> str:
    levels = calibration.levels if calibration is not None else ()
    measured = [item for item in levels if math.isfinite(item.calibrated)]
    if not measured:
        return "how often its intervals cover could not be measured"
    item = min(measured, key=lambda v: v.coverage)
    return f"{_percent(item.coverage)} intervals covered {_percent(item.calibrated)} of past values"


def explicit_summary(label: str) -> str:
    """The verdict on a model the caller named: nothing was backtested."""
    return (
        f"{label} fitted as requested; no backtest was run, so its skill over the naive "
        "forecast and how often its intervals cover were not measured."
    )
