"""Markers for results that do not apply, and JSON-ready numbers (no NaN or inf on the wire)."""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np


@dataclass(frozen=True)
class NotApplicable:
    """A test or measure that cannot be computed on this series, with the reason why."""

    reason: str


def plain_float(value: float | np.floating[Any] | None) -> float | None:
    """A finite Python float, or None for NaN, inf and None (JSON has no NaN)."""
    if value is None:
        return None
    out = float(value)
    return out if math.isfinite(out) else None


def plain_floats(values: np.ndarray) -> list[float | None]:
    """A list of finite floats with None in place of NaN and inf."""
    return [plain_float(v) for v in np.asarray(values, dtype=float)]
