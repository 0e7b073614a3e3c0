"""Trend and seasonal strength (Wang, Smith & Hyndman 2006), candidate periods and outliers.

Seasonal series are decomposed by STL (Cleveland et al. 1990) with a seasonal window of 13,
two inner passes, one robustness pass (so that a spike stays in the remainder instead of
leaking into the seasonal values a year away, which flagged its neighbours as outliers), and
loess jumps of a tenth of each window (the defaults of the original Fortran implementation),
cheaper than statsmodels' defaults (five inner passes, every point smoothed; RESULTS.md).
Non-seasonal series get a LOWESS trend over a tenth of the series instead.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd

from service.core.applicability import NotApplicable

SEASONAL_WINDOW = 13
"""STL seasonal smoother span in cycles (odd, >= 7 as Cleveland et al. 1990 advise)."""

OUTLIER_RULE = (
    "A point is an outlier when its decomposition remainder r has |r - median(r)| > "
    "3 x 1.4826 x MAD(r) (Leys, Ley, Klein, Bernard & Licata 2013)."
)
OUTLIER_LIST_LIMIT = 100
MIN_TREND_POINTS = 7
PERIODOGRAM_SHARE = 0.05
"""A periodogram peak is a candidate only when it holds at least this share of the variance."""


@dataclass(frozen=True)
class Decomposition:
    """Trend, seasonal (None when not applicable) and remainder of a gap-free series."""

    method: str
    period: int
    trend: np.ndarray
    seasonal: np.ndarray | None
    remainder: np.ndarray
    settings: dict[str, Any]
    seasonal_reason: str | None


@dataclass(frozen=True)
class CandidatePeriod:
    """A period suggested by the data, with the evidence of the ACF and the periodogram."""

    period: int
    found_by: str
    autocorrelation: float | None
    share_of_variance: float | None


@dataclass(frozen=True)
class Outlier:
    """One observed point whose remainder lies beyond the robust threshold."""

    timestamp: pd.Timestamp
    value: float
    remainder: float
    score: float


@dataclass(frozen=True)
class Outliers:
    """The points beyond the threshold (the first 100 listed) and the rule used."""

    count: int
    threshold: float
    points: tuple[Outlier, ...]


def seasonal_reason(n: int, period: int) -> str | None:
    """Why seasonal measures do not apply (period 1, or under two full seasons), else None."""
    if period <= 1:
        return "the series is non-seasonal (seasonal period 1)"
    if n < 2 * period + 1:
        return f"{n} observations: STL needs more than two full seasons ({2 * period} points)"
    return None


def stl_settings(period: int) -> dict[str, int]:
    """Window lengths and loess jumps of our STL: trend and low-pass windows as Cleveland's."""
    trend = math.ceil(1.5 * period / (1.0 - 1.5 / SEASONAL_WINDOW))
    trend += trend % 2 == 0
    low_pass = period + 1
    low_pass += low_pass % 2 == 0
    return {
        "seasonal": SEASONAL_WINDOW,
        "trend": trend,
        "low_pass": low_pass,
        "seasonal_jump": math.ceil(SEASONAL_WINDOW / 10),
        "trend_jump": math.ceil(trend / 10),
        "low_pass_jump": math.ceil(low_pass / 10),
    }


def decompose(x: np.ndarray, period: int) -> Decomposition | NotApplicable:
    """STL for seasonal series with two full seasons, a LOWESS trend otherwise."""
    from statsmodels.nonparametric.smoothers_lowess import lowess
    from statsmodels.tsa.seasonal import STL

    n = x.size
    reason = seasonal_reason(n, period)
    if reason is None:
        settings = stl_settings(period)
        fit = STL(x, period=period, robust=True, **settings).fit(inner_iter=2, outer_iter=1)
        trend = np.asarray(fit.trend, dtype=float)
        seasonal = np.asarray(fit.seasonal, dtype=float)
        settings_out: dict[str, Any] = {
            **settings,
            "inner_iterations": 2,
            "robustness_iterations": 1,
        }
        return Decomposition(
            "stl", period, trend, seasonal, x - trend - seasonal, settings_out, None
        )
    if n < MIN_TREND_POINTS:
        return NotApplicable(f"{n} observations: a trend needs at least {MIN_TREND_POINTS}")
    window = max(MIN_TREND_POINTS, math.ceil(0.1 * n))
    trend = lowess(
        x,
        np.arange(n, dtype=float),
        frac=min(1.0, window / n),
        it=0,
        delta=window / 10.0,
        return_sorted=False,
    )
    trend = np.asarray(trend, dtype=float)
    settings_out = {"window": window, "delta": window / 10.0, "robust_iterations": 0}
    return Decomposition("lowess", period, trend, None, x - trend, settings_out, reason)


def strength(remainder: np.ndarray, component: np.ndarray) -> float:
    """max(0, 1 - Var(R)/Var(C + R)), Wang, Smith & Hyndman (2006)."""
    total = float(np.var(component + remainder))
    if total == 0.0:
        return 0.0
    return max(0.0, 1.0 - float(np.var(remainder)) / total)


def trend_strength(d: Decomposition) -> float:
    """Strength of trend of a decomposition."""
    return strength(d.remainder, d.trend)


def seasonal_strength(d: Decomposition) -> float | None:
    """Strength of seasonality, or None when the decomposition has no seasonal part."""
    return None if d.seasonal is None else strength(d.remainder, d.seasonal)


def candidate_periods(detrended: np.ndarray, acf: np.ndarray, band: float) -> list[CandidatePeriod]:
    """Up to three periodogram peaks (>= 5 % of the variance each) and the first ACF peak."""
    from scipy import signal

    n = detrended.size
    frequencies, power = signal.periodogram(detrended, detrend="linear")
    total = float(power[1:].sum())
    shares: dict[int, float] = {}
    if total > 0.0:
        peaks, _ = signal.find_peaks(power)
        peaks = peaks[(frequencies[peaks] > 0.0) & (frequencies[peaks] * n >= 2.0)]
        for i in peaks[np.argsort(power[peaks])[::-1]]:
            period = fundamental(1.0 / frequencies[i], n)
            share = float(power[i]) / total
            if share < PERIODOGRAM_SHARE:
                break
            if period >= 2 and period not in shares:
                shares[period] = share
            if len(shares) == 3:
                break
    acf_peak = _first_acf_peak(acf, band)
    periods = list(shares)
    if acf_peak is not None and acf_peak not in shares:
        periods.append(acf_peak)
    out = []
    for period in periods:
        by = [
            m for m, hit in (("periodogram", period in shares), ("acf", period == acf_peak)) if hit
        ]
        out.append(
            CandidatePeriod(
                period=period,
                found_by=" and ".join(by),
                autocorrelation=float(acf[period - 1]) if period <= acf.size else None,
                share_of_variance=shares.get(period),
            )
        )
    return out


def fundamental(period: float, n: int) -> int:
    """The whole-number cycle a periodogram peak belongs to: a peak at a non-integer period is
    a harmonic (a weekly shape in daily data peaks at 7, 3.5 and 2.33 days), so the smallest
    multiple k·period (k <= 6) that lands on a whole number within the frequency resolution is
    its cycle; 3.5 is reported as 7, not rounded to 3 or 4."""
    for k in range(1, 7):
        multiple = k * period
        # One periodogram bin is 1/n in frequency: k·period²/n in period at this multiple.
        if abs(multiple - round(multiple)) <= max(0.05, k * period * period / n):
            if round(multiple) <= n // 2:
                return round(multiple)
            break
    return round(period)


def _first_acf_peak(acf: np.ndarray, band: float) -> int | None:
    """The first lag >= 2 where the ACF has a local maximum above the white-noise band."""
    for k in range(1, acf.size - 1):
        if acf[k] > band and acf[k] >= acf[k - 1] and acf[k] > acf[k + 1]:
            return k + 1
    return None


def outliers(
    remainder: np.ndarray, values: np.ndarray, observed: np.ndarray, index: pd.DatetimeIndex
) -> Outliers | NotApplicable:
    """Observed points whose remainder lies beyond 3 robust standard deviations of the median."""
    centre = float(np.median(remainder))
    spread = 1.4826 * float(np.median(np.abs(remainder - centre)))
    if spread == 0.0:
        return NotApplicable("the remainder has zero median absolute deviation: no robust scale")
    scores = np.abs(remainder - centre) / spread
    flagged = np.flatnonzero((scores > 3.0) & observed)
    listed = flagged[np.argsort(scores[flagged])[::-1][:OUTLIER_LIST_LIMIT]]
    points = tuple(
        Outlier(index[i], float(values[i]), float(remainder[i]), float(scores[i]))
        for i in np.sort(listed)
    )
    return Outliers(int(flagged.size), 3.0 * spread, points)


@dataclass(frozen=True)
class Components:
    """A decomposition with the series' timestamps: what a plot of its parts needs."""

    decomposition: Decomposition
    index: pd.DatetimeIndex
