"""Prediction intervals from a point path and per-step standard deviations."""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
from scipy import stats


@dataclass(frozen=True)
class Interval:
    """A central prediction interval at one coverage level, one bound per horizon step."""

    coverage: float
    lower: np.ndarray
    upper: np.ndarray


def normal_quantile(coverage: float) -> float:
    """The two-sided standard-normal multiplier for a central interval (1.959964 for 0.95)."""
    return float(stats.norm.ppf(0.5 + coverage / 2.0))


def normal_intervals(
    point: np.ndarray, sd: np.ndarray, coverage: Sequence[float]
) -> tuple[Interval, ...]:
    """Gaussian intervals point ± z·sd for each coverage level."""
    point = np.asarray(point, dtype=float)
    sd = np.asarray(sd, dtype=float)
    return tuple(
        Interval(float(c), point - normal_quantile(c) * sd, point + normal_quantile(c) * sd)
        for c in coverage
    )
