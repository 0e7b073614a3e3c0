"""Accuracy measures of point forecasts and prediction intervals.

Point: MAE, RMSE, sMAPE and MASE (Hyndman & Koehler 2006, scaled by the in-sample MAE of the
naive or seasonal naive one-step forecast). Intervals: coverage, the interval (Winkler) score
of Winkler (1972) / Gneiting & Raftery (2007), and its scaled mean MSIS (M4 competition).
Missing actual values (NaN) are left out of every measure, so a gap in a holdout is not an error.
"""

from __future__ import annotations

import numpy as np

from service.core.errors import RequestError

POINT_METRICS: tuple[str, ...] = ("mase", "smape", "rmse", "mae")


def _pair(actual: np.ndarray, forecast: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Both arrays as float, restricted to the steps where the actual value is known."""
    a = np.asarray(actual, dtype=float)
    f = np.asarray(forecast, dtype=float)
    if a.shape != f.shape:
        raise RequestError(f"actual {a.shape} and forecast {f.shape} differ in shape")
    keep = np.isfinite(a)
    return a[keep], f[keep]


def mae(actual: np.ndarray, forecast: np.ndarray) -> float:
    """Mean absolute error; NaN when no actual value is known."""
    a, f = _pair(actual, forecast)
    return float(np.mean(np.abs(a - f))) if a.size else float("nan")


def rmse(actual: np.ndarray, forecast: np.ndarray) -> float:
    """Root mean squared error; NaN when no actual value is known."""
    a, f = _pair(actual, forecast)
    return float(np.sqrt(np.mean((a - f) ** 2))) if a.size else float("nan")


def smape(actual: np.ndarray, forecast: np.ndarray) -> float:
    """Symmetric MAPE in percent, 200·|a−f|/(|a|+|f|), as in M3/M4; a = f = 0 scores 0."""
    a, f = _pair(actual, forecast)
    if not a.size:
        return float("nan")
    denom = np.abs(a) + np.abs(f)
    terms = np.divide(200.0 * np.abs(a - f), denom, out=np.zeros_like(denom), where=denom > 0)
    return float(np.mean(terms))


def mase_scale(history: np.ndarray, seasonal_period: int = 1) -> float:
    """In-sample MAE of the (seasonal) naive one-step forecast: the MASE denominator.

    Falls back to lag 1 when the history holds no full season; NaN when no pair is usable.
    """
    y = np.asarray(history, dtype=float)
    m = seasonal_period if 1 <= seasonal_period < y.size else 1
    if y.size <= m:
        return float("nan")
    diffs = np.abs(y[m:] - y[:-m])
    diffs = diffs[np.isfinite(diffs)]
    return float(np.mean(diffs)) if diffs.size else float("nan")


def mase(actual: np.ndarray, forecast: np.ndarray, scale: float) -> float:
    """Mean absolute scaled error: MAE divided by the in-sample naive MAE ``scale``."""
    if not np.isfinite(scale) or scale <= 0:
        return float("nan")
    return mae(actual, forecast) / scale


def coverage(actual: np.ndarray, lower: np.ndarray, upper: np.ndarray) -> float:
    """Share of known actual values inside [lower, upper]."""
    a = np.asarray(actual, dtype=float)
    lo = np.asarray(lower, dtype=float)
    hi = np.asarray(upper, dtype=float)
    keep = np.isfinite(a)
    if not keep.any():
        return float("nan")
    inside = (a[keep] >= lo[keep]) & (a[keep] <= hi[keep])
    return float(np.mean(inside))


def interval_scores(
    actual: np.ndarray, lower: np.ndarray, upper: np.ndarray, level: float
) -> np.ndarray:
    """Per-step interval score (u−l) + (2/α)(l−y)·[y<l] + (2/α)(y−u)·[y>u], α = 1 − level.

    Lower is better; NaN where the actual value is missing.
    """
    if not 0.0 < level < 1.0:
        raise RequestError(f"coverage level must lie strictly between 0 and 1, got {level}")
    alpha = 1.0 - level
    a = np.asarray(actual, dtype=float)
    lo = np.asarray(lower, dtype=float)
    hi = np.asarray(upper, dtype=float)
    below = np.where(a < lo, lo - a, 0.0)
    above = np.where(a > hi, a - hi, 0.0)
    score = (hi - lo) + (2.0 / alpha) * (below + above)
    return np.where(np.isfinite(a), score, np.nan)


def interval_score(actual: np.ndarray, lower: np.ndarray, upper: np.ndarray, level: float) -> float:
    """Mean interval score over the steps with a known actual value."""
    scores = interval_scores(actual, lower, upper, level)
    scores = scores[np.isfinite(scores)]
    return float(np.mean(scores)) if scores.size else float("nan")


def msis(
    actual: np.ndarray, lower: np.ndarray, upper: np.ndarray, level: float, scale: float
) -> float:
    """Mean scaled interval score: the mean interval score divided by the MASE scale."""
    if not np.isfinite(scale) or scale <= 0:
        return float("nan")
    return interval_score(actual, lower, upper, level) / scale


def check_metric(metric: str, name: str = "metric") -> str:
    """A point metric the selection can rank by."""
    if metric not in POINT_METRICS:
        raise RequestError(
            f"{name} must be one of {', '.join(POINT_METRICS)}; got {metric!r}", field=name
        )
    return metric
