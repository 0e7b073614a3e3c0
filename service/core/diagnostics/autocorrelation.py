"""Sample ACF and PACF with the white-noise band, significant lags and Ljung-Box (1978) tests.

The ACF is computed by FFT (O(n log n), so 100,000 points cost milliseconds) and the PACF by
the Durbin-Levinson recursion on that ACF (O(L²)); both use the biased (divide-by-n)
autocovariance of textbook practice.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from service.core.applicability import NotApplicable

BAND_QUANTILE = 1.959964
"""Two-sided 95 % standard-normal quantile of the white-noise band ±1.959964/√n."""

LAG_LIMIT = 1000
"""Hard ceiling on lags: the PACF recursion costs O(L²), and no season we serve needs more."""

BAND_NOTE = (
    "An autocorrelation outside ±1.959964/√n, centred on zero, differs from white noise at 5 % "
    "(Bartlett 1946)."
)


@dataclass(frozen=True)
class LjungBox:
    """Ljung-Box (1978) portmanteau statistic at one lag, with its chi-square reference."""

    lag: int
    statistic: float
    degrees_of_freedom: int
    p_value: float


@dataclass(frozen=True)
class Correlogram:
    """ACF and PACF at lags 1..max_lag, the white-noise band and the lags outside it."""

    observations: int
    max_lag: int
    acf: np.ndarray
    pacf: np.ndarray
    band: float
    significant_acf_lags: tuple[int, ...]
    significant_pacf_lags: tuple[int, ...]
    ljung_box: tuple[LjungBox, ...]
    notes: tuple[str, ...]


def default_max_lag(n: int, seasonal_period: int) -> int:
    """min(max(10, 2m), n // 4): two seasons when there is one, never past a quarter of n."""
    return min(max(10, 2 * seasonal_period), n // 4)


def largest_lag(n: int) -> int:
    """The largest lag we estimate for n points: n // 2 - 1 (statsmodels' PACF bound), <= 1000."""
    return min(n // 2 - 1, LAG_LIMIT)


def white_noise_band(n: int) -> float:
    """Half-width 1.959964/√n of the 95 % band for the ACF of white noise of length n."""
    return BAND_QUANTILE / math.sqrt(n)


def sample_acf(x: np.ndarray, max_lag: int) -> np.ndarray:
    """Autocorrelations r_1..r_max_lag (biased autocovariance over the variance), by FFT."""
    n = x.size
    centred = x - x.mean()
    size = 1 << (2 * n - 1).bit_length()
    spectrum = np.fft.rfft(centred, size)
    autocov = np.fft.irfft(spectrum * np.conj(spectrum), size)[: max_lag + 1]
    return np.asarray(autocov[1:] / autocov[0], dtype=float)


SEASONALITY_TEST_LEVEL = 0.90
"""The level of the seasonal-lag autocorrelation test of the M4 competition's benchmarks."""


def seasonal_lag_stands_out(
    x: np.ndarray, period: int, level: float = SEASONALITY_TEST_LEVEL
) -> bool:
    """|r_m| above z·√((1 + 2 Σ_{k<m} r_k²)/n), the seasonality test of the M4 benchmarks
    (Makridakis et al. 2020; the band is Bartlett's for an MA(m - 1) process)."""
    if period <= 1 or x.size <= period or not np.any(x != x[0]):
        return False
    from scipy import stats

    r = sample_acf(x, period)
    band = stats.norm.ppf(0.5 + level / 2) * math.sqrt((1 + 2 * np.sum(r[:-1] ** 2)) / x.size)
    return bool(abs(r[-1]) > band)


def partial_acf(acf: np.ndarray) -> np.ndarray:
    """Partial autocorrelations from the ACF by the Durbin-Levinson recursion."""
    size = acf.size
    out = np.empty(size)
    if size == 0:
        return out
    phi = np.array([acf[0]])
    out[0] = acf[0]
    variance = 1.0 - acf[0] ** 2
    for k in range(1, size):
        if variance <= 0.0:
            out[k:] = np.nan
            break
        reflection = (acf[k] - np.dot(phi, acf[k - 1 :: -1][:k])) / variance
        phi = np.append(phi - reflection * phi[::-1], reflection)
        out[k] = reflection
        variance *= 1.0 - reflection**2
    return out


def ljung_box_lags(n: int, seasonal_period: int) -> tuple[int, ...]:
    """Lags 10 and 20, and m and 2m for seasonal data, kept when <= n/5 (common practice)."""
    wanted = {10, 20}
    if seasonal_period > 1:
        wanted |= {seasonal_period, 2 * seasonal_period}
    kept = tuple(sorted(lag for lag in wanted if lag <= n // 5))
    if kept:
        return kept
    return (n // 5,) if n // 5 >= 1 else ()


def primary_ljung_box_lag(n: int, seasonal_period: int) -> int:
    """One lag for a yes/no decision: 10, or 2m when seasonal, at most n/5 (common practice)."""
    lag = 2 * seasonal_period if seasonal_period > 1 else 10
    return max(1, min(lag, n // 5))


def ljung_box(acf: np.ndarray, n: int, lag: int, fitted_parameters: int = 0) -> LjungBox:
    """Q = n(n+2) Σ r_k²/(n-k) for k <= lag, against χ² with lag - fitted_parameters df."""
    from scipy import stats

    k = np.arange(1, lag + 1)
    statistic = float(n * (n + 2) * np.sum(acf[:lag] ** 2 / (n - k)))
    dof = max(1, lag - fitted_parameters)
    return LjungBox(lag, statistic, dof, float(stats.chi2.sf(statistic, dof)))


def correlogram(
    x: np.ndarray, max_lag: int, seasonal_period: int, notes: tuple[str, ...] = ()
) -> Correlogram | NotApplicable:
    """ACF, PACF, band, significant lags and Ljung-Box tests of a finite series."""
    n = x.size
    if n < 4:
        return NotApplicable(f"{n} observations: at least 4 are needed for autocorrelations")
    if not np.any(x != x[0]):
        return NotApplicable("the series is constant: its autocorrelations are undefined")
    limit = largest_lag(n)
    used = max_lag
    if used > limit:
        used = limit
        notes = (*notes, f"max_lag {max_lag} clamped to {limit} for {n} observations")
    if used < 1:
        return NotApplicable(f"{n} observations leave no lag to estimate")
    box_lags = ljung_box_lags(n, seasonal_period)
    acf = sample_acf(x, max(used, *box_lags) if box_lags else used)
    pacf = partial_acf(acf[:used])
    band = white_noise_band(n)
    return Correlogram(
        observations=n,
        max_lag=used,
        acf=acf[:used],
        pacf=pacf,
        band=band,
        significant_acf_lags=significant_lags(acf[:used], band),
        significant_pacf_lags=significant_lags(pacf, band),
        ljung_box=tuple(ljung_box(acf, n, lag) for lag in box_lags),
        notes=notes,
    )


def significant_lags(values: np.ndarray, band: float) -> tuple[int, ...]:
    """The lags (1-based) whose estimate lies outside ±band."""
    return tuple(int(k) + 1 for k in np.flatnonzero(np.abs(values) > band))
