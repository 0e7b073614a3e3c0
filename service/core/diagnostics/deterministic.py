"""Tests on the deterministic parts of a series, asked by the unit-root procedure: the
t-ratio of a linear trend, the t-test of a mean (the drift of a unit root), and the F-test of
a fixed season with its removal."""

from __future__ import annotations

import math

import numpy as np

from service.core.diagnostics.autocorrelation import sample_acf

LEVEL_SEASON = 0.001
"""A fixed season is removed before the tests only when clearly there: a false removal on a
series without one costs the tests power."""


def trend_t_ratio(x: np.ndarray) -> float:
    """OLS slope of x on time over its standard error, widened for AR(1) residuals.

    Valid for a stationary series (the only case it is asked about): the factor
    sqrt((1 + r)/(1 - r)), r the residuals' lag-1 autocorrelation, is the long-run variance
    ratio of an AR(1) (common practice).
    """
    n = x.size
    t = np.arange(n, dtype=float)
    t -= t.mean()
    slope = float(t @ (x - x.mean()) / (t @ t))
    residuals = x - x.mean() - slope * t
    denominator = float(residuals @ residuals)
    if denominator <= 0.0:
        return math.inf
    r = min(max(float(sample_acf(residuals, 1)[0]), -0.99), 0.99)
    standard_error = math.sqrt(denominator / (n - 2) / float(t @ t) * (1 + r) / (1 - r))
    return slope / standard_error


def seasonal_adjustment(
    x: np.ndarray, seasonal_period: int
) -> tuple[np.ndarray, float, float] | None:
    """x without its fixed seasonal pattern, with the F-test that found it, or None.

    A fixed season makes the Dickey-Fuller regressions mistake the seasonal swings for
    persistence. When a one-way F-test finds the first differences' means differ by season
    position at 0.1 %, the seasonal means of the linearly detrended series are removed; the
    unit-root tests keep their distributions with seasonal dummies (Dickey, Bell & Miller
    1986; from memory).
    """
    m = seasonal_period
    if m <= 1 or x.size < 3 * m:
        return None
    d = np.diff(x)
    found = one_way_f(d, np.arange(1, x.size) % m, m)
    if found is None or found[1] >= LEVEL_SEASON:
        return None
    n = x.size
    t = np.arange(n, dtype=float)
    t -= t.mean()
    detrended = x - x.mean() - t * float(t @ (x - x.mean()) / (t @ t))
    positions = np.arange(n) % m
    means = np.bincount(positions, detrended, m) / np.bincount(positions, minlength=m)
    return x - (means - means.mean())[positions], found[0], found[1]


def one_way_f(values: np.ndarray, groups: np.ndarray, k: int) -> tuple[float, float] | None:
    """F statistic and p-value of a one-way analysis of variance over k groups (or None when
    a group has fewer than two values or nothing varies): what scipy's f_oneway gives, with
    bincount instead of one array per group."""
    from scipy import special

    counts = np.bincount(groups, minlength=k).astype(float)
    if counts.min() < 2:
        return None
    means = np.bincount(groups, values, k) / counts
    within = float(np.sum((values - means[groups]) ** 2))
    between = float(np.sum(counts * (means - values.mean()) ** 2))
    n = values.size
    if within <= 0.0:
        return None
    statistic = (between / (k - 1)) / (within / (n - k))
    return statistic, float(special.fdtrc(k - 1, n - k, statistic))


def mean_test(values: np.ndarray) -> tuple[float, float]:
    """t statistic and two-sided p-value of the mean against 0 (scipy's ttest_1samp, without
    its overhead of a few milliseconds)."""
    from scipy import special

    n = values.size
    spread = float(np.std(values, ddof=1))
    if spread == 0.0:
        return (math.inf if values[0] != 0 else math.nan), (0.0 if values[0] != 0 else 1.0)
    statistic = float(np.mean(values)) / (spread / math.sqrt(n))
    return statistic, float(2.0 * special.stdtr(n - 1, -abs(statistic)))
