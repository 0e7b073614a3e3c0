"""Turn core results into plain JSON-ready values (finite floats or null, ISO 8601 strings)."""

from __future__ import annotations

import dataclasses
import math
from typing import Any

import numpy as np
import pandas as pd

from service.core.errors import FitError
from service.core.models.base import Description, FitWarning, Forecast


def timestamps(index: pd.DatetimeIndex) -> list[str]:
    """ISO 8601 strings; dates alone when every stamp is a naive midnight."""
    if index.tz is None and (index.normalize() == index).all():
        return [t.strftime("%Y-%m-%d") for t in index]
    return [t.isoformat() for t in index]


def floats(values: Any) -> list[float | None]:
    """A list of floats with non-finite entries as null (JSON has no NaN)."""
    arr = np.asarray(values, dtype=float)
    return [float(v) if math.isfinite(v) else None for v in arr.tolist()]


def plain(value: Any) -> Any:
    """Recursively convert numpy scalars, arrays, tuples and dataclasses to JSON values."""
    if dataclasses.is_dataclass(value) and not isinstance(value, type):
        return {f.name: plain(getattr(value, f.name)) for f in dataclasses.fields(value)}
    if isinstance(value, dict):
        return {str(k): plain(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [plain(v) for v in value]
    if isinstance(value, np.ndarray):
        return [plain(v) for v in value.tolist()]
    if isinstance(value, (np.bool_, bool)):
        return bool(value)
    if isinstance(value, (np.integer,)):
        return int(value)
    if isinstance(value, (float, np.floating)):
        f = float(value)
        return f if math.isfinite(f) else None
    if isinstance(value, pd.Timestamp):
        return value.isoformat()
    return value


def forecast_body(forecast: Forecast) -> dict[str, Any]:
    """timestamps, point and intervals of a forecast."""
    return {
        "timestamps": timestamps(forecast.index),
        "point": floats(forecast.point),
        "intervals": [
            {"coverage": i.coverage, "lower": floats(i.lower), "upper": floats(i.upper)}
            for i in forecast.intervals
        ],
    }


def model_body(description: Description) -> dict[str, Any]:
    """The model part of a response."""
    body = plain(description)
    body["information_criteria"] = {
        k: v for k, v in body["information_criteria"].items() if v is not None
    }
    return body


def warnings_body(found: list[FitWarning]) -> list[dict[str, str]]:
    """Warnings without repeats, in the order they were raised."""
    seen: dict[tuple[str, str], None] = {}
    for w in found:
        seen.setdefault((w.code, w.message), None)
    return [{"code": c, "message": m} for c, m in seen]


def refuse_overflow(body: dict[str, Any]) -> dict[str, Any]:
    """The forecast body unchanged, or FitError when a point or bound is not a finite float.

    The rule for intervals that are infinite in theory or overflow float64 (a coverage a
    hair below 1, a strong Box-Cox exponent, values near the float64 range): refused with a
    422 naming what the caller can change, never a 500 and never a bound of null.
    """
    if any(v is None for v in body["point"]):
        raise FitError(
            "the point forecast is not a finite number for this series (its values overflow "
            "the model's arithmetic); rescale the values or choose another model",
            field="series.values",
        )
    for interval in body["intervals"]:
        if any(v is None for v in (*interval["lower"], *interval["upper"])):
            raise FitError(
                f"the {interval['coverage']} interval is unbounded for this series and "
                "model (its bounds overflow float64); ask for a lower coverage, another "
                "transform or another model",
                field="coverage",
            )
    return body
