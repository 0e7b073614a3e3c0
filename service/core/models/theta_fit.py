"""Theta's slope share fitted with α by one-step squared errors.

The model (Fiorucci, Pellegrini, Louzada, Petropoulos & Koehler 2016, the optimised theta
model, with the level started at the first observation as in theta.py): the level is SES of
the series, ℓ_t = αy_t + (1−α)ℓ_{t−1}, ℓ_0 = y_0, and the one-step forecast of y_t is
ℓ_{t−1} + s·b·(1 − (1−α)^t)/α, with b the OLS slope on time and s = 1 − 1/θ the share of it
carried as drift (θ >= 1, so s in [0, 1]; the original method has θ = 2, s = ½). For a given
α the squared errors are quadratic in s, so s has a closed form and only α is searched.
In the running variant (their dynamic model) b at step t is the slope of y_0..y_{t−1}: the
one-step errors then never use a slope fitted on later data.
"""

from __future__ import annotations

import numpy as np

_ALPHA_GRID = np.linspace(0.02, 1.0, 50)
"""Coarse α grid before the bounded search: the profile in α can have several minima."""


def ols_slope(values: np.ndarray) -> float:
    """b0: least-squares slope of the series on time 0, 1, ..., T−1."""
    t = np.arange(values.size, dtype=float)
    t -= t.mean()
    return float(np.dot(t, values - values.mean()) / np.dot(t, t))


def running_slopes(values: np.ndarray) -> np.ndarray:
    """b_k, the OLS slope of the first k values on time, for k = 0..n (0 below two values)."""
    n = values.size
    k = np.arange(n + 1, dtype=float)
    t = np.arange(n, dtype=float)
    sum_y = np.r_[0.0, np.cumsum(values)]
    sum_ty = np.r_[0.0, np.cumsum(t * values)]
    spread = k * (k * k - 1.0) / 12.0  # Σ (t − t̄)² over t = 0..k−1
    centred = sum_ty - (k - 1.0) / 2.0 * sum_y  # Σ (t − t̄) y_t
    out = np.zeros(n + 1)
    enough = k >= 2
    out[enough] = centred[enough] / spread[enough]
    return out


def ses_levels(values: np.ndarray, alpha: float) -> np.ndarray:
    """SES levels ℓ_0..ℓ_{T−1} started at the first observation (ℓ_0 = y_0), by a linear
    filter (ℓ_t = αy_t + (1−α)ℓ_{t−1}): the α searches evaluate it many times."""
    from scipy.signal import lfilter

    start = np.array([(1.0 - alpha) * values[0]])
    return np.asarray(lfilter([alpha], [1.0, alpha - 1.0], values, zi=start)[0])


def _profile(values: np.ndarray, slopes: np.ndarray, alpha: float) -> tuple[float, float]:
    """(sum of squared one-step errors, share) at ``alpha`` with the best share in [0, 1]."""
    levels = ses_levels(values, alpha)
    rest = values[1:] - levels[:-1]
    t = np.arange(1, values.size, dtype=float)
    carried = slopes * (1.0 - (1.0 - alpha) ** t) / alpha
    norm = float(np.dot(carried, carried))
    share = float(np.clip(np.dot(rest, carried) / norm, 0.0, 1.0)) if norm > 0 else 0.0
    return float(np.sum((rest - share * carried) ** 2)), share


def fitted_share(values: np.ndarray, running: bool = False) -> tuple[float, float]:
    """(α, share) minimising the one-step squared errors; α in [1e-4, 1] by a grid and a
    bounded search around its best point."""
    from scipy import optimize

    if running:
        slopes = running_slopes(values)[1:-1]
    else:
        slopes = np.full(values.size - 1, ols_slope(values))
    sse = [_profile(values, slopes, a)[0] for a in _ALPHA_GRID]
    best = int(np.argmin(sse))
    low = _ALPHA_GRID[best - 1] if best > 0 else 1e-4
    high = _ALPHA_GRID[best + 1] if best + 1 < _ALPHA_GRID.size else 1.0
    found = optimize.minimize_scalar(
        lambda a: _profile(values, slopes, a)[0],
        bounds=(low, high),
        method="bounded",
        options={"xatol": 1e-8},
    )
    alpha = float(found.x)
    if sse[best] < found.fun:
        alpha = float(_ALPHA_GRID[best])
    return alpha, _profile(values, slopes, alpha)[1]
