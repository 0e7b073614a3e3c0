"""The benchmarks every automatic selection is measured against, and the skill over them."""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
import pandas as pd

from service.core.models.base import Specification, family_of
from service.core.models.naive import NaiveSpec
from service.core.models.seasonal_naive import SeasonalNaiveSpec
from service.core.selection.candidates import SeriesProfile

SKILL_MARGIN = 0.05
"""A random walk keeps the naive forecast unless the chosen model beats it by this share."""
NO_SKILL_MESSAGE = (
    "The series behaves like a random walk and no candidate beat the naive forecast by 5 % in "
    "the backtest, so the naive forecast (the last value) is returned. A low error here does "
    "not mean a useful model: it only says the next value is close to the current one."
)


DRIFT_NO_SKILL_MESSAGE = (
    "The series behaves like a random walk with a steady average step and the selected models "
    "did not beat the drift forecast (the last value plus the average step) by 5 % in the "
    "backtest, so that forecast is used. A low error here does not mean a useful model: it "
    "only says the next value is close to the current one moved on by the average step."
)
DRIFT_T_SQUARED = 2.0
"""A random walk's guard carries the average step when its squared t-ratio exceeds this. With
N steps of variance σ², carrying the estimated drift adds h²σ²/N to the mean squared error at
step h and removes the h²μ² of leaving it out; E[μ̂²] = μ² + σ²/N, so the estimate is expected
to pay when N·μ̂²/σ̂² > 2 (the one-parameter penalty of AIC, Akaike 1974). The diagnostics' 5 %
t-test asks whether there is a drift at all (t² > 3.84), not whether carrying it pays."""


SEASONAL_NO_SKILL_MESSAGE = (
    "The series behaves like a seasonal random walk and no candidate beat the seasonal naive "
    "forecast by 5 % in the backtest, so the seasonal naive forecast (the value one season "
    "earlier) is returned."
)


def guarded_benchmark(profile: SeriesProfile, drifts: bool = False) -> tuple[str, str] | None:
    """The family the random-walk guard falls back to and its warning, or None (no guard):
    naive for a random walk (drift when ``drifts``: see ``drift_pays``), seasonal naive for a
    seasonal random walk (the diagnostics' verdict)."""
    if profile.seasonal_random_walk:
        return "seasonal_naive", SEASONAL_NO_SKILL_MESSAGE
    if profile.random_walk:
        return ("drift", DRIFT_NO_SKILL_MESSAGE) if drifts else ("naive", NO_SKILL_MESSAGE)
    return None


def drift_pays(y: pd.Series) -> bool:
    """Whether carrying the average step is expected to lower a random walk's forecast error:
    N·(mean step / sd of the steps)² > DRIFT_T_SQUARED."""
    steps = np.diff(y.to_numpy(dtype=float))
    steps = steps[np.isfinite(steps)]
    if steps.size < 3:
        return False
    spread = float(np.std(steps, ddof=1))
    if not spread > 0:
        return False
    return bool(steps.size * (float(np.mean(steps)) / spread) ** 2 > DRIFT_T_SQUARED)


def with_benchmarks(specs: list[Specification], profile: SeriesProfile) -> list[Specification]:
    """Naive, and seasonal naive when seasonal, are always evaluated: skill needs them."""
    families = {family_of(s) for s in specs}
    out = list(specs)
    if "naive" not in families:
        out.insert(0, NaiveSpec())
    if profile.seasonal and "seasonal_naive" not in families:
        out.insert(1, SeasonalNaiveSpec())
    return out


def benchmark_of(specs: Sequence[Specification], profile: SeriesProfile) -> Specification:
    """Seasonal naive for a seasonal series, naive otherwise."""
    wanted = "seasonal_naive" if profile.seasonal else "naive"
    return next(s for s in specs if family_of(s) == wanted)


def skill(score: float, benchmark: float) -> float | None:
    """1 - score / benchmark; None when either is not finite or the benchmark is not positive."""
    if not (np.isfinite(score) and np.isfinite(benchmark)) or benchmark <= 0:
        return None
    return float(1.0 - score / benchmark)
