"""Small argument checks for public core functions; each names the parameter it rejects."""

from __future__ import annotations

import math
from collections.abc import Sequence

import numpy as np
import pandas as pd

from service.core.errors import FitError, RequestError


def check_positive_int(value: object, name: str, maximum: int | None = None) -> int:
    """An integer >= 1 (and <= maximum when given)."""
    if isinstance(value, bool) or not isinstance(value, int) or value < 1:
        raise RequestError(f"{name} must be a whole number >= 1, got {value!r}", field=name)
    if maximum is not None and value > maximum:
        raise RequestError(f"{name} must be at most {maximum}, got {value}", field=name)
    return value


def check_coverage(levels: Sequence[float], name: str = "coverage") -> tuple[float, ...]:
    """Coverage levels strictly between 0 and 1, unique, returned sorted ascending."""
    out: list[float] = []
    for i, level in enumerate(levels):
        if isinstance(level, bool) or not isinstance(level, (int, float)):
            raise RequestError(
                f"coverage level must be a number, got {level!r}", field=f"{name}[{i}]"
            )
        if not math.isfinite(level) or not 0.0 < float(level) < 1.0:
            raise RequestError(
                f"coverage level must lie strictly between 0 and 1, got {level}",
                field=f"{name}[{i}]",
            )
        out.append(float(level))
    if len(set(out)) != len(out):
        raise RequestError("coverage levels must be unique", field=name)
    return tuple(sorted(out))


def complete_values(y: pd.Series, family: str, minimum: int = 1) -> np.ndarray:
    """The values of a series a family can only fit without gaps, with at least ``minimum``."""
    values = y.to_numpy(dtype=float)
    if not np.all(np.isfinite(values)):
        raise FitError(
            f"{family} needs a complete series (use missing=interpolate)", field="series.values"
        )
    if values.size < minimum:
        raise FitError(
            f"{family} needs at least {minimum} observations, got {values.size}",
            field="series.values",
        )
    return values
