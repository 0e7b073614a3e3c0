"""Picklable top-level functions that the worker pool runs: one per kind of request."""

from __future__ import annotations

import warnings
from collections.abc import Iterator
from contextlib import contextmanager
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd

from service.core.errors import WindvaneError
from service.core.models.base import Fitted, FitWarning, Specification
from service.core.models.naive import NaiveSpec
from service.core.models.seasonal_naive import SeasonalNaiveSpec
from service.runtime import render


@dataclass(frozen=True)
class ForecastTask:
    """Everything a worker needs to answer POST /v1/forecasts."""

    y: pd.Series
    seasonal_period: int
    specification: Specification | None
    horizon: int
    coverage: tuple[float, ...]
    name: str | None = None
    include: tuple[str, ...] = ()
    candidates: tuple[Specification, ...] | None = None
    metric: str = "mase"
    transform: dict[str, Any] = field(default_factory=dict)
    regressors: tuple[dict[str, Any], ...] | None = None


@contextmanager
def collected_warnings(into: list[FitWarning]) -> Iterator[None]:
    """Turn library warnings raised inside the block into FitWarning data."""
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        yield
    for w in caught:
        into.append(FitWarning(_warning_code(w.category), str(w.message).splitlines()[0]))


def _warning_code(category: type[Warning]) -> str:
    name = category.__name__
    return {"ConvergenceWarning": "convergence", "ValueWarning": "value",
            "RuntimeWarning": "numerical", "UserWarning": "library"}.get(name, "library")


def benchmark_for(y: pd.Series, seasonal_period: int) -> Specification:
    """Seasonal naive when the series has a season with two full cycles, naive otherwise."""
    if seasonal_period > 1 and len(y) >= 2 * seasonal_period:
        return SeasonalNaiveSpec()
    return NaiveSpec()


def fit_with_fallback(spec: Specification, y: pd.Series, seasonal_period: int,
                      found: list[FitWarning]) -> Fitted:
    """Fit ``spec``; a numerical failure (not a domain refusal) falls back to the benchmark."""
    try:
        with collected_warnings(found):
            return spec.fit(y, seasonal_period)
    except WindvaneError:
        raise
    except (ArithmeticError, ValueError, np.linalg.LinAlgError) as exc:
        fallback = benchmark_for(y, seasonal_period)
        found.append(FitWarning(
            "fallback", f"{spec.family} could not be fitted ({type(exc).__name__}: {exc}); "
            f"answered with {fallback.family} instead"))
        return fallback.fit(y, seasonal_period)


def forecast(task: ForecastTask) -> dict[str, Any]:
    """Fit (or select) a model and forecast; the response body without provenance."""
    found: list[FitWarning] = []
    spec = task.specification or benchmark_for(task.y, task.seasonal_period)
    fitted = fit_with_fallback(spec, task.y, task.seasonal_period, found)
    with collected_warnings(found):
        result = fitted.forecast(task.horizon, task.coverage)
    if not np.all(np.isfinite(result.point)):
        fallback = benchmark_for(task.y, task.seasonal_period)
        found.append(FitWarning("fallback", f"{spec.family} gave non-finite forecasts; "
                                f"answered with {fallback.family} instead"))
        fitted = fallback.fit(task.y, task.seasonal_period)
        result = fitted.forecast(task.horizon, task.coverage)
    found.extend(fitted.warnings)
    body: dict[str, Any] = {"name": task.name, **render.forecast_body(result)}
    body["model"] = render.model_body(fitted.describe())
    body["selection"] = None
    if task.specification is None:
        found.insert(0, FitWarning(
            "benchmark_model", f"no model was given: answered with the {spec.family} "
            "benchmark"))
    body["warnings"] = render.warnings_body(found)
    if "fitted" in task.include:
        body["fitted"] = render.floats(fitted.fitted_values())
    if "residuals" in task.include:
        body["residuals"] = render.floats(fitted.residuals())
    return body
