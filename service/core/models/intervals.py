"""Prediction intervals from a point path and per-step standard deviations."""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from functools import lru_cache

import numpy as np


@dataclass(frozen=True)
class Interval:
    """A central prediction interval at one coverage level, one bound per horizon step."""

    coverage: float
    lower: np.ndarray
    upper: np.ndarray


@lru_cache(maxsize=64)
def normal_quantile(coverage: float) -> float:
    """The two-sided standard-normal multiplier for a central interval (1.959964 for 0.95).

    ``special.ndtri`` is what ``stats.norm.ppf`` computes (the same bits) without the
    distribution machinery, which cost more than the quantile; auto asks for it at every
    origin of every candidate."""
    from scipy import special

    return float(special.ndtri(0.5 + coverage / 2.0))


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
