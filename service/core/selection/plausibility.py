"""Whether a forecast stays within a plausible band around the history it was made from.

A guard for the automatic selection, not a statistical test: models fitted on a transformed
scale or with a near-unit smoothing of the trend can forecast, or bound, values that explode
once back on the original scale (tests/reference/README.md, trap 8; seen here on the lynx
series, where a log-scale ETS member's 95 % upper bound reached 9e11 against a history
below 7,000, and an averaged bound inherited it through a weight of 1e-5). The band is the
history's range widened by POINT_SPREADS of that range for point forecasts and BOUND_SPREADS
for interval bounds (our choice: wider than any honest interval of a series that lies
within its range).
"""

from __future__ import annotations

import numpy as np

from service.core.models.base import Forecast

POINT_SPREADS = 3.0
BOUND_SPREADS = 6.0


def implausible(forecast: Forecast, history: np.ndarray) -> str | None:
    """Why ``forecast`` leaves the plausible band around ``history``; None when it does not."""
    values = np.asarray(history, dtype=float)
    values = values[np.isfinite(values)]
    if values.size == 0:
        return None
    point = np.asarray(forecast.point, dtype=float)
    if not np.all(np.isfinite(point)):
        return "its forecast is not finite"
    low, high = float(values.min()), float(values.max())
    spread = (high - low) or abs(float(values.mean())) or 1.0
    if point.min() < low - POINT_SPREADS * spread or point.max() > high + POINT_SPREADS * spread:
        return "its point forecast leaves any plausible range of the history"
    for interval in forecast.intervals:
        lower = np.asarray(interval.lower, dtype=float)
        upper = np.asarray(interval.upper, dtype=float)
        outside = lower.min() < low - BOUND_SPREADS * spread
        outside = outside or upper.max() > high + BOUND_SPREADS * spread
        if outside or not (np.all(np.isfinite(lower)) and np.all(np.isfinite(upper))):
            return f"its {interval.coverage:.0%} interval explodes beyond the history's range"
    return None
