"""Whether a forecast stays within a plausible band around the history it was made from.

A guard of the ETS search and the automatic selection, not a statistical test: a model fitted
on a transformed scale or with a near-unit trend smoothing can forecast, or bound, values that
explode back on the original scale (tests/reference/README.md, trap 8; the lynx case is in
tests/benchmarks/RESULTS.md). The band is the history's range widened by a multiple of its
width (our choice: wider than any honest interval of a series that keeps within its range).
"""

from __future__ import annotations

import numpy as np

from service.core.models.base import Forecast

POINT_SPREADS = 3.0
"""Point forecasts may leave the history's range by at most three times its width."""
BOUND_SPREADS = 6.0
"""Interval bounds may leave it by at most six times its width."""


def point_implausible(point: np.ndarray, history: np.ndarray) -> str | None:
    """Why a point forecast is not finite or leaves the band around ``history``; else None."""
    values = np.asarray(history, dtype=float)
    values = values[np.isfinite(values)]
    if values.size == 0:
        return None
    point = np.asarray(point, dtype=float)
    if not np.all(np.isfinite(point)):
        return "its forecast is not finite"
    low, high = _band(values, POINT_SPREADS)
    if point.min() < low or point.max() > high:
        return "its point forecast leaves any plausible range of the history"
    return None


def implausible(forecast: Forecast, history: np.ndarray) -> str | None:
    """Why ``forecast`` (points or interval bounds) leaves the band around ``history``."""
    why = point_implausible(forecast.point, history)
    values = np.asarray(history, dtype=float)
    values = values[np.isfinite(values)]
    if why is not None or values.size == 0:
        return why
    low, high = _band(values, BOUND_SPREADS)
    for interval in forecast.intervals:
        lower = np.asarray(interval.lower, dtype=float)
        upper = np.asarray(interval.upper, dtype=float)
        outside = lower.min() < low or upper.max() > high
        if outside or not (np.all(np.isfinite(lower)) and np.all(np.isfinite(upper))):
            return f"its {interval.coverage:.0%} interval explodes beyond the history's range"
    return None


def _band(values: np.ndarray, spreads: float) -> tuple[float, float]:
    """The history's range widened by ``spreads`` times its width (its level when flat)."""
    low, high = float(values.min()), float(values.max())
    spread = (high - low) or abs(float(values.mean())) or 1.0
    return low - spreads * spread, high + spreads * spread
