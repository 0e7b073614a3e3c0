"""Empirical coverage of backtest intervals and their split-conformal adjustment.

The nonconformity score of one backtest forecast at level c is how far the actual value went,
in units of the model's own interval half-width on that side:
s = max((y − point)/(upper − point), (point − y)/(point − lower)), so y is inside iff s <= 1.
Scores pooled over origins and steps give a per-level factor q, the ⌈(n+1)c⌉-th smallest score
(split conformal: Vovk, Gammerman & Shafer 2005; Angelopoulos & Bates 2021); the calibrated
interval is point − q·(point − lower) .. point + q·(upper − point), so asymmetric model
intervals keep their shape and only their width is corrected; q is kept in the level's
``factor_bounds``. Below NARROW_BELOW a factor under one is taken only as far as the evidence
goes: to the quantile at the upper one-sided confidence limit of the level (``narrowing``).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import pandas as pd

from service.core.evaluation.origins import MINIMUM_ORIGINS
from service.core.evaluation.records import ModelBacktest
from service.core.models.base import Forecast
from service.core.models.intervals import Interval

FACTOR_BOUNDS = (1.0, 3.0)
"""Our guard at levels of NARROW_BELOW and above: the factors only widen, and at most triple,
a model's intervals. Never narrowing there: the backtest windows overlap and end before the
forecast origin, so a factor below one rests on little independent evidence, and a miss costs
more than width (the interval score charges 2/α per unit outside)."""
NARROW_BELOW = 0.9
NARROW_FLOOR = 0.5
"""Below NARROW_BELOW a factor may narrow the intervals, at most to half their width, and only
as far as ``narrowing`` finds evidence for: a miss costs less there, and the 80 % intervals of
the development rows over-covered by frequency (yearly, monthly, daily, weekly) under the
earlier fixed floor of 0.9. The rules measured are in tests/benchmarks/RESULTS.md."""
EVIDENCE_Z = 1.645
"""One-sided 95 % normal quantile: a narrowing must rest on a backtest coverage significantly
above the level, as in a test of unconditional coverage (Kupiec 1995)."""


def factor_bounds(level: float) -> tuple[float, float]:
    """The range a level's conformal factor is kept in."""
    low, high = FACTOR_BOUNDS
    return (NARROW_FLOOR if level < NARROW_BELOW else low), high


def narrowing(scores: np.ndarray, level: float, targets: int) -> float:
    """The smallest factor below one the backtest supports at ``level`` (1: none).

    With ``targets`` distinct actual values behind the scores, the coverage the backtest
    measures has a standard error of about sqrt(c(1 − c)/targets); the factor narrows no
    further than the quantile at c + EVIDENCE_Z standard errors, so intervals that covered
    more than the level by chance alone keep their width.
    """
    upper = level + EVIDENCE_Z * math.sqrt(level * (1.0 - level) / max(targets, 1))
    if upper >= 1.0 or scores.size == 0:
        return 1.0
    return min(1.0, conformal_quantile(scores, upper))


def targets(backtest: ModelBacktest, index: pd.Index | None) -> int:
    """Distinct actual values the origins' windows cover (each counted once however many
    overlapping windows score it); without the series' index, every score counts."""
    every = sum(int(np.isfinite(f.actual).sum()) for f in backtest.forecasts)
    if index is None:
        return every
    found = index.get_indexer([f.origin for f in backtest.forecasts])
    if (found < 0).any():
        return every
    seen: set[int] = set()
    for position, f in zip(found, backtest.forecasts, strict=True):
        seen.update((int(position) + 1 + np.flatnonzero(np.isfinite(f.actual))).tolist())
    return len(seen)


@dataclass(frozen=True)
class LevelCalibration:
    """One coverage level: nominal, measured in the backtest, and the width factor found."""

    coverage: float
    empirical: float
    factor: float
    scores: int
    calibrated: float = float("nan")
    """Coverage in the same backtests of the intervals as delivered (after the factor)."""


@dataclass(frozen=True)
class Calibration:
    """Coverage of a model's intervals in its backtest and, when applied, the factors used."""

    origins: int
    applied: bool
    reason: str
    levels: tuple[LevelCalibration, ...]

    def factor(self, level: float) -> float:
        """The width factor for ``level`` (1 when not applied or not measured)."""
        if not self.applied:
            return 1.0
        for item in self.levels:
            if math.isclose(item.coverage, level) and math.isfinite(item.factor):
                return item.factor
        return 1.0


def nonconformity(backtest: ModelBacktest, level: float) -> np.ndarray:
    """Scores s for every origin and step with a known actual value (flattened)."""
    out: list[np.ndarray] = []
    for f in backtest.forecasts:
        up = f.upper[level] - f.point
        down = f.point - f.lower[level]
        above = _ratio(f.actual - f.point, up)
        below = _ratio(f.point - f.actual, down)
        s = np.maximum(above, below)
        out.append(s[np.isfinite(f.actual)])
    return np.concatenate(out) if out else np.empty(0)


def _ratio(distance: np.ndarray, width: np.ndarray) -> np.ndarray:
    """distance / width, with a zero width counting as inside (0) or far outside (inf)."""
    safe = np.where(width > 0, width, 1.0)
    ratio = distance / safe
    degenerate = np.where(distance > 0, np.inf, 0.0)
    return np.where(width > 0, ratio, degenerate)


def conformal_quantile(scores: np.ndarray, level: float) -> float:
    """The ⌈(n+1)·level⌉-th smallest score (the largest when that rank exceeds n)."""
    n = scores.size
    if n == 0:
        return float("nan")
    rank = min(n, math.ceil((n + 1) * level))
    return float(np.sort(scores)[rank - 1])


def calibrate(
    backtest: ModelBacktest,
    minimum_origins: int = MINIMUM_ORIGINS,
    index: pd.Index | None = None,
) -> Calibration:
    """Measured coverage per level, and conformal factors when there are enough origins.

    ``index`` is the series' time index (the origins are found in it to count the distinct
    actual values the scores rest on)."""
    origins = len(backtest.forecasts)
    enough = backtest.ok and origins >= minimum_origins
    distinct = targets(backtest, index) if backtest.forecasts else 0
    levels = []
    for level in backtest.levels:
        s = nonconformity(backtest, level)
        empirical = float(np.mean(s <= 1.0)) if s.size else float("nan")
        factor = conformal_quantile(s, level)
        if not np.isnan(factor):
            # An infinite score (a zero-width interval that missed: naive after a run of
            # equal values) still stops at the bound, like any score above it.
            factor = float(np.clip(factor, *factor_bounds(level)))
            if factor < 1.0:
                factor = max(factor, narrowing(s, level, distinct))
        applied = factor if enough and np.isfinite(factor) else 1.0
        calibrated = float(np.mean(s <= applied)) if s.size else float("nan")
        levels.append(LevelCalibration(level, empirical, factor, int(s.size), calibrated))
    if enough:
        reason = (
            f"split-conformal factors from {origins} rolling origins, applied to widen "
            f"intervals that covered too little (narrowing only below {NARROW_BELOW:.0%}, "
            "where the backtest covered significantly more than the level)"
        )
    else:
        reason = (
            f"model intervals kept: {origins} origins, fewer than the {minimum_origins} "
            "needed to calibrate"
        )
    return Calibration(origins, enough, reason, tuple(levels))


def apply(forecast: Forecast, calibration: Calibration) -> Forecast:
    """The forecast with each interval's sides scaled by its level's factor, kept nested."""
    if not calibration.applied:
        return forecast
    point = np.asarray(forecast.point, dtype=float)
    adjusted = []
    for iv in forecast.intervals:
        q = calibration.factor(iv.coverage)
        lower = point - q * (point - np.asarray(iv.lower, dtype=float))
        upper = point + q * (np.asarray(iv.upper, dtype=float) - point)
        adjusted.append(Interval(iv.coverage, lower, upper))
    return Forecast(forecast.index, point, _nested(adjusted))


def _nested(intervals: list[Interval]) -> tuple[Interval, ...]:
    """Widen where needed so a higher level's interval always contains a lower level's."""
    order = sorted(range(len(intervals)), key=lambda i: intervals[i].coverage)
    out: list[Interval | None] = [None] * len(intervals)
    lower_bound: np.ndarray | None = None
    upper_bound: np.ndarray | None = None
    for i in order:
        iv = intervals[i]
        lo, hi = iv.lower, iv.upper
        if lower_bound is not None and upper_bound is not None:
            lo = np.minimum(lo, lower_bound)
            hi = np.maximum(hi, upper_bound)
        lower_bound, upper_bound = lo, hi
        out[i] = Interval(iv.coverage, lo, hi)
    return tuple(item for item in out if item is not None)
