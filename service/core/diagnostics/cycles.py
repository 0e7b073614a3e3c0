"""Several seasonal periods at once: MSTL strengths per period and the periods that matter.

The series is decomposed by statsmodels' MSTL (one STL seasonal component per period,
shortest first, two passes; the same STL settings as the single-period decomposition,
without robustness passes, which MSTL repeats per component). The strength of each period is
max(0, 1 - Var(R)/Var(S_i + R)) (Wang, Smith & Hyndman 2006, per component as for MSTL in
Hyndman & Athanasopoulos, FPP 3rd ed.); a period matters when its strength reaches
``MATTERS``. Outliers are then flagged on the MSTL remainder, where neither cycle leaves a
trace (on a single-period remainder the other cycle's swings look like outliers).
"""

from __future__ import annotations

import math
import warnings
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from service.core.data.periods import period_text
from service.core.diagnostics.seasonality import stl_settings, strength

MSTL_SEASONAL_WINDOW = 51
"""Seasonal smoother span in cycles for every period: wider than MSTL's default (7 + 4i), which
let the components absorb noise and narrowed the intervals (tests/benchmarks/RESULTS.md)."""
MSTL_SEASONAL_DEGREE = 0
"""Each cycle position's values smoothed by a local mean, not a local line (STL's default):
with a few cycles per position (three years of daily data, six weeks of hourly) the line's
end extrapolated noise into the carried-forward cycle; MSTL + ETS MASE on seeded counts, four
holdouts each: daily 1.20 -> 1.19, on the log scale 1.11 -> 0.98; hourly six weeks 0.63 ->
0.59 (tests/benchmarks/RESULTS.md)."""

MATTERS = 0.3
"""Strength from which a period is said to drive the series (findings call < 0.3 weak)."""


@dataclass(frozen=True)
class PeriodStrength:
    """One period: as given, as decomposed (whole steps), its strength, and whether it matters."""

    period: float
    decomposed_as: int
    strength: float

    @property
    def matters(self) -> bool:
        """Strong enough to be modelled."""
        return self.strength >= MATTERS


@dataclass(frozen=True)
class SeveralPeriods:
    """MSTL of the series: strengths per period, trend strength and the remainder."""

    periods: tuple[PeriodStrength, ...]
    trend_strength: float
    remainder: np.ndarray
    left_out: tuple[str, ...]

    @property
    def periods_that_matter(self) -> tuple[float, ...]:
        """The periods whose strength reaches the threshold, shortest first."""
        return tuple(p.period for p in self.periods if p.matters)


def usable_periods(periods: tuple[float, ...], n: int) -> tuple[tuple[float, ...], tuple[str, ...]]:
    """The periods with more than two full cycles of data, and a note for each one left out."""
    kept: list[float] = []
    notes: list[str] = []
    for p in periods:
        if n >= 2 * round(p) + 1:
            kept.append(p)
        else:
            notes.append(f"period {period_text(p)}: {n} observations hold fewer than two cycles")
    return tuple(kept), tuple(notes)


def several_periods(x: np.ndarray, periods: tuple[float, ...]) -> SeveralPeriods | None:
    """MSTL strengths for two or more usable periods of a gap-free series; None for fewer."""
    kept, notes = usable_periods(periods, x.size)
    whole: list[int] = []
    for p in kept:
        if round(p) not in whole:
            whole.append(round(p))
    if len(whole) < 2:
        return None
    parts = mstl_parts(x, whole)
    seasonal, remainder = parts.seasonal, parts.remainder
    found = tuple(
        PeriodStrength(p, round(p), strength(remainder, seasonal[:, whole.index(round(p))]))
        for p in kept
    )
    return SeveralPeriods(found, strength(remainder, parts.trend), remainder, notes)


@dataclass(frozen=True)
class MstlParts:
    """Trend, one seasonal column per period (n x k) and remainder."""

    trend: np.ndarray
    seasonal: np.ndarray
    remainder: np.ndarray


def mstl_parts(values: np.ndarray, periods: Sequence[int]) -> MstlParts:
    """statsmodels' MSTL with cheap STL passes (two inner, none robust, loess jumps) and
    local-mean seasonal smoothing (MSTL_SEASONAL_DEGREE)."""
    from statsmodels.tsa.seasonal import MSTL

    settings = stl_settings(min(periods))
    kwargs = {
        "robust": False,
        "inner_iter": 2,
        "outer_iter": 0,
        "seasonal_deg": MSTL_SEASONAL_DEGREE,
        "seasonal_jump": math.ceil(MSTL_SEASONAL_WINDOW / 10),
        "trend_jump": settings["trend_jump"],
        "low_pass_jump": settings["low_pass_jump"],
    }
    with warnings.catch_warnings():
        # MSTL warns about nothing we can act on beyond what the checks above refuse.
        warnings.simplefilter("ignore", UserWarning)
        windows = [MSTL_SEASONAL_WINDOW] * len(periods)
        result = MSTL(
            values, periods=list(periods), windows=windows, iterate=2, stl_kwargs=kwargs
        ).fit()
    seasonal = np.asarray(result.seasonal, dtype=float).reshape(values.size, -1)
    return MstlParts(
        np.asarray(result.trend, dtype=float), seasonal, np.asarray(result.resid, dtype=float)
    )
