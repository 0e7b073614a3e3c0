"""Picklable top-level functions that the worker pool runs: one per kind of request."""

from __future__ import annotations

import pickle
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd

from service.core.data.periods import period_text, too_long_periods
from service.core.data.regressors import RegressorSet
from service.core.diagnostics.report import diagnose
from service.core.diagnostics.sections import Diagnostics
from service.core.errors import WindvaneError
from service.core.evaluation.backtest import backtest as run_backtest
from service.core.evaluation.records import BacktestReport
from service.core.models.base import Description, Fitted, FitWarning, Forecast, Specification
from service.core.models.library_warnings import captured
from service.core.models.lower_bound import (
    BoundReport,
    apply_lower_bound,
    families_in,
    resolve_lower_bound,
    with_family_floor,
)
from service.core.models.naive import NaiveSpec
from service.core.models.seasonal_naive import SeasonalNaiveSpec
from service.core.models.transforms import TransformedSpec, transform_from_value
from service.core.selection.auto import backtest_auto, select
from service.core.selection.candidates import candidates_for, profile_series
from service.core.selection.outcome import Selection
from service.core.selection.summary import auto_summary, explicit_summary
from service.runtime.spread import lent_map


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
    seasonal_periods: tuple[float, ...] = ()
    interpolated: int = 0
    lower_bound: float | None = None
    lower_bound_given: bool = False


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
        with captured(found):
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
        with captured(found):
            fitted = task.specification.fit(  # type: ignore[call-arg]
                task.y, task.seasonal_period, regressors=task.regressors.history
            )
        return FittedBundle(fitted, (*found, *fitted.warnings))
    spec = with_transform(task.specification, task.transform)
    fitted = fit_with_fallback(spec, task.y, task.seasonal_period, found)
    return FittedBundle(fitted, (*found, *fitted.warnings))


@dataclass(frozen=True)
class ForecastAnswer:
    """A worker's answer to a forecast: the forecast, the model, how it was chosen, warnings.

    The server turns it into the response body (``service.api.render``)."""

    name: str | None
    forecast: Forecast
    description: Description
    selection: Selection | None
    warnings: tuple[FitWarning, ...]
    summary: str = ""
    """One plain sentence on the forecast (core.selection.summary)."""
    fitted: np.ndarray | None = None
    residuals: np.ndarray | None = None
    lower_bound: BoundReport | None = None


def _answer(
    task: ForecastTask,
    fitted: Fitted,
    result: Forecast,
    found: list[FitWarning],
    selection: Selection | None = None,
) -> ForecastAnswer:
    """The answer, with the in-sample values the request asked for, censored at the lower
    bound (core.models.lower_bound), and a warning when gaps were filled before fitting."""
    include = task.include
    description = fitted.describe()
    values = task.y.to_numpy(dtype=float)
    bound = resolve_lower_bound(values, task.lower_bound, task.lower_bound_given)
    bound = with_family_floor(bound, families_in(description.specification))
    result, report = apply_lower_bound(result, bound)
    notes = list(found)
    if task.interpolated:
        notes.append(
            FitWarning(
                "interpolated",
                f"{task.interpolated} missing value(s) were filled by linear interpolation "
                "(missing policy 'interpolate') before fitting; the forecast treats them as "
                "observed",
            )
        )
    notes += periods_left_out(task.seasonal_periods, len(task.y))
    if selection is None:
        summary = explicit_summary(description.label)
    else:
        summary = auto_summary(selection)
    return ForecastAnswer(
        name=task.name,
        forecast=result,
        description=description,
        selection=selection,
        warnings=tuple(notes),
        lower_bound=report,
        summary=summary,
        fitted=np.asarray(fitted.fitted_values(), dtype=float) if "fitted" in include else None,
        residuals=np.asarray(fitted.residuals(), dtype=float) if "residuals" in include else None,
    )


def periods_left_out(periods: tuple[float, ...], observations: int) -> list[FitWarning]:
    """A warning for each seasonal period given that no model can estimate on this history."""
    return [
        FitWarning(
            "period_left_out",
            f"seasonal period {period_text(p)} was left out: the {observations} observations "
            f"hold fewer than two of its cycles ({needed} points needed)",
        )
        for p, needed in too_long_periods(periods, observations)
    ]


def forecast_from(bundle: FittedBundle, task: ForecastTask) -> ForecastAnswer:
    """Forecast from an already fitted model: a new horizon or coverage needs no refit."""
    found = list(bundle.warnings)
    fitted = bundle.fitted
    with captured(found):
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
    return _answer(task, fitted, result, found)


def forecast_stored(
    stored: bytes | None, task: ForecastTask
) -> tuple[ForecastAnswer, bytes | None]:
    """Forecast from the fit store's pickled bundle, or fit when there is none or it no longer
    loads (a class changed since it was stored).

    The second item is the pickled bundle to store, None when the stored one served or the
    new one will not pickle. The bundle crosses to the server as bytes, so that the server
    stores it without importing the family's implementation; the server hands in only an
    entry whose seal it verified."""
    if stored is not None:
        try:
            bundle = pickle.loads(stored)
        except Exception:  # authentic but unusable: fitted again and stored again
            bundle = None
        if isinstance(bundle, FittedBundle):
            return forecast_from(bundle, task), None
    bundle = fit_explicit(task)
    answer = forecast_from(bundle, task)
    try:
        return answer, pickle.dumps(bundle, protocol=pickle.HIGHEST_PROTOCOL)
    except Exception:  # a model that will not pickle is answered, not stored
        return answer, None


def forecast(task: ForecastTask) -> ForecastAnswer:
    """Fit (or select) a model and forecast."""
    if task.specification is None:
        return _auto_forecast(task)
    return forecast_from(fit_explicit(task), task)


def with_transform(spec: Specification, transform: dict[str, Any] | None) -> Specification:
    """The specification fitted on the log or Box-Cox scale when a transform is asked for.

    The request's transform replaces one that an automatic candidate carries of its own."""
    chosen = transform_from_value(transform or None)
    if chosen.kind == "none":
        return spec
    base = spec.base if isinstance(spec, TransformedSpec) else spec
    return TransformedSpec(base, chosen)


def _auto_forecast(task: ForecastTask) -> ForecastAnswer:
    """Model "auto": diagnostics, candidates, backtest, refit, calibrated forecast."""
    found: list[FitWarning] = []
    with captured(found):
        report = diagnose(task.y, task.seasonal_period, periods=task.seasonal_periods)
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
            map_fn=lent_map(),
        )
    found = [*chosen.warnings, *found]
    return _answer(task, chosen.fitted, chosen.forecast, found, chosen.selection)


@dataclass(frozen=True)
class DiagnosticsTask:
    """Everything a worker needs to answer POST /v1/diagnostics."""

    y: pd.Series
    seasonal_period: int
    max_lag: int | None = None
    include_components: bool = False
    seasonal_periods: tuple[float, ...] = ()


def diagnostics(task: DiagnosticsTask) -> tuple[Diagnostics, list[FitWarning]]:
    """The diagnostics report and the library warnings raised while making it."""
    found: list[FitWarning] = []
    with captured(found):
        report = diagnose(
            task.y,
            task.seasonal_period,
            max_lag=task.max_lag,
            include_components=task.include_components,
            periods=task.seasonal_periods,
        )
    return report, found


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
    seasonal_periods: tuple[float, ...] = ()
    estimation: str = "first_origin"


def backtests(task: BacktestTask) -> tuple[BacktestReport, list[FitWarning]]:
    """Rolling-origin evaluation of the given specifications, or of the auto candidates."""
    found: list[FitWarning] = []
    options: dict[str, Any] = {
        "horizon": task.horizon,
        "origins": task.origins,
        "step": task.step,
        "coverage": task.coverage,
        "metric": task.metric,
        "estimation": task.estimation,
    }
    with captured(found):
        if task.specifications is None:
            diagnostics = diagnose(task.y, task.seasonal_period, periods=task.seasonal_periods)
            report = backtest_auto(task.y, task.seasonal_period, diagnostics=diagnostics, **options)
        else:
            report = run_backtest(task.y, task.specifications, task.seasonal_period, **options)
    return report, found
