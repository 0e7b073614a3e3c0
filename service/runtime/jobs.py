"""Picklable top-level functions that the worker pool runs: one per kind of request."""

from __future__ import annotations

import warnings
from collections.abc import Iterator
from contextlib import contextmanager
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd

from service.core.data.regressors import RegressorSet
from service.core.diagnostics.report import diagnose
from service.core.errors import WindvaneError
from service.core.evaluation.backtest import backtest as run_backtest

# The families: the automatic selection looks them up in the registry only when a request
# runs (candidate rules, refit), so without this import the first request of a process paid
# ~0.24 s of statsmodels imports. The pool's fork server preloads this module.
from service.core.models import registry as _registry  # noqa: F401
from service.core.models.base import Fitted, FitWarning, Specification
from service.core.models.naive import NaiveSpec
from service.core.models.seasonal_naive import SeasonalNaiveSpec
from service.core.models.transforms import TransformedSpec, transform_from_value
from service.core.selection.auto import backtest_auto, select
from service.core.selection.candidates import candidates_for, profile_series
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
    regressors: RegressorSet | None = None


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
    return {
        "ConvergenceWarning": "convergence",
        "ValueWarning": "value",
        "RuntimeWarning": "numerical",
        "UserWarning": "library",
    }.get(name, "library")


def benchmark_for(y: pd.Series, seasonal_period: int) -> Specification:
    """Seasonal naive when the series has a season with two full cycles, naive otherwise."""
    if seasonal_period > 1 and len(y) >= 2 * seasonal_period:
        return SeasonalNaiveSpec()
    return NaiveSpec()


def fit_with_fallback(
    spec: Specification, y: pd.Series, seasonal_period: int, found: list[FitWarning]
) -> Fitted:
    """Fit ``spec``; a numerical failure (not a domain refusal) falls back to the benchmark."""
    try:
        with collected_warnings(found):
            return spec.fit(y, seasonal_period)
    except WindvaneError:
        raise
    except (ArithmeticError, ValueError, np.linalg.LinAlgError) as exc:
        fallback = benchmark_for(y, seasonal_period)
        found.append(
            FitWarning(
                "fallback",
                f"{spec.family} could not be fitted ({type(exc).__name__}: {exc}); "
                f"answered with {fallback.family} instead",
            )
        )
        return fallback.fit(y, seasonal_period)


@dataclass(frozen=True)
class FittedBundle:
    """What the fit store keeps for an explicit specification: the model and its warnings."""

    fitted: Fitted
    warnings: tuple[FitWarning, ...]


def fit_explicit(task: ForecastTask) -> FittedBundle:
    """Fit the task's specification (with its transform), falling back on numerical failure."""
    assert task.specification is not None
    found: list[FitWarning] = []
    if task.regressors is not None:
        with collected_warnings(found):
            fitted = task.specification.fit(  # type: ignore[call-arg]
                task.y, task.seasonal_period, regressors=task.regressors.history
            )
        return FittedBundle(fitted, (*found, *fitted.warnings))
    spec = with_transform(task.specification, task.transform)
    fitted = fit_with_fallback(spec, task.y, task.seasonal_period, found)
    return FittedBundle(fitted, (*found, *fitted.warnings))


def forecast_from(bundle: FittedBundle, task: ForecastTask) -> dict[str, Any]:
    """Forecast from an already fitted model: a new horizon or coverage needs no refit."""
    found = list(bundle.warnings)
    fitted = bundle.fitted
    with collected_warnings(found):
        if task.regressors is not None:
            result = fitted.forecast(  # type: ignore[call-arg]
                task.horizon, task.coverage, future_regressors=task.regressors.future
            )
        else:
            result = fitted.forecast(task.horizon, task.coverage)
    if not np.all(np.isfinite(result.point)):
        fallback = benchmark_for(task.y, task.seasonal_period)
        found.append(
            FitWarning(
                "fallback",
                f"{fitted.specification.family} gave non-finite forecasts; answered with "
                f"{fallback.family} instead",
            )
        )
        fitted = fallback.fit(task.y, task.seasonal_period)
        result = fitted.forecast(task.horizon, task.coverage)
    body: dict[str, Any] = {"name": task.name, **render.forecast_body(result)}
    body["model"] = render.model_body(fitted.describe())
    body["selection"] = None
    body["warnings"] = render.warnings_body(found)
    _add_in_sample(body, fitted, task.include)
    return render.refuse_overflow(body)


def fit_and_forecast(task: ForecastTask) -> tuple[dict[str, Any], FittedBundle]:
    """Fit, then forecast; the bundle goes back to the server for the fit store."""
    bundle = fit_explicit(task)
    return forecast_from(bundle, task), bundle


def forecast(task: ForecastTask) -> dict[str, Any]:
    """Fit (or select) a model and forecast; the response body without provenance."""
    if task.specification is None:
        return _auto_forecast(task)
    return fit_and_forecast(task)[0]


def with_transform(spec: Specification, transform: dict[str, Any] | None) -> Specification:
    """The specification fitted on the log or Box-Cox scale when a transform is asked for.

    The request's transform replaces one that an automatic candidate carries of its own."""
    chosen = transform_from_value(transform or None)
    if chosen.kind == "none":
        return spec
    base = spec.base if isinstance(spec, TransformedSpec) else spec
    return TransformedSpec(base, chosen)


def _add_in_sample(body: dict[str, Any], fitted: Fitted, include: tuple[str, ...]) -> None:
    if "fitted" in include:
        body["fitted"] = render.floats(fitted.fitted_values())
    if "residuals" in include:
        body["residuals"] = render.floats(fitted.residuals())


def _auto_forecast(task: ForecastTask) -> dict[str, Any]:
    """Model "auto": diagnostics, candidates, backtest, refit, calibrated forecast."""
    found: list[FitWarning] = []
    with collected_warnings(found):
        report = diagnose(task.y, task.seasonal_period)
        candidates = task.candidates
        if transform_from_value(task.transform or None).kind != "none":
            if candidates is None:
                profile = profile_series(task.y, task.seasonal_period, report)
                candidates = candidates_for(profile).specifications
            candidates = tuple(with_transform(c, task.transform) for c in candidates)
        chosen = select(
            task.y,
            task.seasonal_period,
            task.horizon,
            task.coverage,
            metric=task.metric,
            candidates=candidates,
            diagnostics=report,
        )
    body: dict[str, Any] = {"name": task.name, **render.forecast_body(chosen.forecast)}
    body["model"] = render.model_body(chosen.fitted.describe())
    body["selection"] = render.plain(chosen.selection.to_dict())
    body["warnings"] = render.warnings_body([*chosen.warnings, *found])
    _add_in_sample(body, chosen.fitted, task.include)
    return render.refuse_overflow(body)


@dataclass(frozen=True)
class DiagnosticsTask:
    """Everything a worker needs to answer POST /v1/diagnostics."""

    y: pd.Series
    seasonal_period: int
    max_lag: int | None = None
    include_components: bool = False


def diagnostics(task: DiagnosticsTask) -> dict[str, Any]:
    """The diagnostics report as a JSON-ready body."""
    found: list[FitWarning] = []
    with collected_warnings(found):
        report = diagnose(
            task.y,
            task.seasonal_period,
            max_lag=task.max_lag,
            include_components=task.include_components,
        )
    body: dict[str, Any] = render.plain(report.to_dict())
    body.setdefault("warnings", [])
    body["warnings"] = [*body["warnings"], *render.warnings_body(found)]
    return body


@dataclass(frozen=True)
class BacktestTask:
    """Everything a worker needs to answer POST /v1/backtests."""

    y: pd.Series
    seasonal_period: int
    specifications: tuple[Specification, ...] | None
    horizon: int
    origins: int
    step: int
    coverage: tuple[float, ...]
    metric: str


def backtests(task: BacktestTask) -> dict[str, Any]:
    """Rolling-origin evaluation of the given specifications, or of the auto candidates."""
    found: list[FitWarning] = []
    options: dict[str, Any] = {
        "horizon": task.horizon,
        "origins": task.origins,
        "step": task.step,
        "coverage": task.coverage,
        "metric": task.metric,
    }
    with collected_warnings(found):
        if task.specifications is None:
            diagnostics = diagnose(task.y, task.seasonal_period)
            report = backtest_auto(task.y, task.seasonal_period, diagnostics=diagnostics, **options)
        else:
            report = run_backtest(task.y, task.specifications, task.seasonal_period, **options)
    body: dict[str, Any] = render.plain(report.to_dict())
    body["warnings"] = render.warnings_body(found)
    return body
