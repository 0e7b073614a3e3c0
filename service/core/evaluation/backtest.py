"""Rolling-origin evaluation that does not peek.

Each specification is fitted ONCE on the data before the first origin; its parameters are then
held fixed and re-filtered (``fitted.refilter``) forward through the later origins (DESIGN,
'Backtests must not peek'). Origins end at the last point: the last window covers the final
``horizon`` points and earlier origins lie ``step`` points apart.
"""

from __future__ import annotations

import dataclasses
import time
import warnings
from collections.abc import Callable, Iterable, Sequence
from dataclasses import dataclass, field
from typing import Any, TypeVar

import numpy as np
import pandas as pd

from service.core.checks import check_coverage
from service.core.errors import RequestError
from service.core.evaluation.origins import Plan, plan_origins
from service.core.evaluation.scoring import (
    check_metric,
    interval_scores,
    mase_scale,
    smape,
)
from service.core.models.base import FitWarning, Specification, as_dict

T = TypeVar("T")
R = TypeVar("R")
MapFn = Callable[[Callable[[T], R], Sequence[T]], Iterable[R]]
"""Like the builtin ``map``: the runtime may pass its pool's map to fan candidates out."""


@dataclass(frozen=True)
class OriginForecast:
    """One origin's forecast beside what happened, with the MASE scale of its history."""

    origin: pd.Timestamp
    actual: np.ndarray
    point: np.ndarray
    lower: dict[float, np.ndarray]
    upper: dict[float, np.ndarray]
    scale: float


@dataclass(frozen=True)
class Scores:
    """Accuracy measures, with coverage and scaled interval score per coverage level."""

    mae: float
    rmse: float
    mase: float
    smape: float
    coverage: dict[float, float]
    msis: dict[float, float]


@dataclass(frozen=True)
class StepScores(Scores):
    """Accuracy at one horizon step (1-based), averaged over the origins."""

    step: int


def _finite_mean(values: Iterable[float]) -> float:
    arr = np.array(list(values), dtype=float)
    arr = arr[np.isfinite(arr)]
    return float(arr.mean()) if arr.size else float("nan")


@dataclass(frozen=True)
class ModelBacktest:
    """One specification's rolling-origin record; ``failure`` says why it has no forecasts."""

    specification: dict[str, Any]
    label: str
    forecasts: tuple[OriginForecast, ...]
    levels: tuple[float, ...]
    fit_seconds: float
    refilter_seconds: float
    warnings: tuple[FitWarning, ...] = ()
    failure: str | None = None
    resolved: Any = None
    """The complete specification the family's own search settled on (for refits)."""
    refit: Any = None
    """A cheaper specification for the refit on the full series, where the family offers one
    (ETS: the same search, its winner's exact fit started from this fit's estimates)."""

    @property
    def ok(self) -> bool:
        """True when every origin produced a finite forecast."""
        return self.failure is None and bool(self.forecasts)

    def at(self, origins: set[pd.Timestamp]) -> ModelBacktest:
        """The same record restricted to the given origins."""
        kept = tuple(f for f in self.forecasts if f.origin in origins)
        return dataclasses.replace(self, forecasts=kept)

    def errors(self) -> np.ndarray:
        """Actual minus point, shape (origins, horizon)."""
        return np.array([f.actual - f.point for f in self.forecasts])

    def scaled_abs_errors(self) -> np.ndarray:
        """|actual − point| / MASE scale of each origin's history, shape (origins, horizon)."""
        return np.array([np.abs(f.actual - f.point) / f.scale for f in self.forecasts])

    def steps(self) -> tuple[StepScores, ...]:
        """Per-step MAE, RMSE, MASE, sMAPE, coverage and MSIS over the origins."""
        if not self.ok:
            return ()
        e = self.errors()
        scaled = self.scaled_abs_errors()
        out = []
        for s in range(e.shape[1]):
            actual = np.array([f.actual[s] for f in self.forecasts])
            point = np.array([f.point[s] for f in self.forecasts])
            cov: dict[float, float] = {}
            score: dict[float, float] = {}
            for level in self.levels:
                lo = np.array([f.lower[level][s] for f in self.forecasts])
                hi = np.array([f.upper[level][s] for f in self.forecasts])
                scales = np.array([f.scale for f in self.forecasts])
                cov[level] = _nanmean(((actual >= lo) & (actual <= hi)).astype(float), actual)
                score[level] = _nanmean(interval_scores(actual, lo, hi, level) / scales, actual)
            out.append(
                StepScores(
                    step=s + 1,
                    mae=_nanmean(np.abs(e[:, s]), actual),
                    rmse=float(np.sqrt(_nanmean(e[:, s] ** 2, actual))),
                    mase=_nanmean(scaled[:, s], actual),
                    smape=smape(actual, point),
                    coverage=cov,
                    msis=score,
                )
            )
        return tuple(out)

    def overall(self) -> Scores | None:
        """The step scores averaged over the steps; None when the model has no forecasts."""
        steps = self.steps()
        if not steps:
            return None
        return Scores(
            mae=_finite_mean(s.mae for s in steps),
            rmse=_finite_mean(s.rmse for s in steps),
            mase=_finite_mean(s.mase for s in steps),
            smape=_finite_mean(s.smape for s in steps),
            coverage={v: _finite_mean(s.coverage[v] for s in steps) for v in self.levels},
            msis={v: _finite_mean(s.msis[v] for s in steps) for v in self.levels},
        )

    def score(self, metric: str) -> float:
        """The model's overall score by ``metric``: mean over origins and steps (inf if failed)."""
        if not self.ok:
            return float("inf")
        if metric == "mase":
            value = _nanmean(self.scaled_abs_errors().ravel(), self.errors().ravel())
        elif metric == "mae":
            value = _nanmean(np.abs(self.errors()).ravel(), self.errors().ravel())
        elif metric == "rmse":
            value = float(np.sqrt(_nanmean(self.errors().ravel() ** 2, self.errors().ravel())))
        else:
            actual = np.concatenate([f.actual for f in self.forecasts])
            point = np.concatenate([f.point for f in self.forecasts])
            value = smape(actual, point)
        return value if np.isfinite(value) else float("inf")

    def to_dict(self) -> dict[str, Any]:
        """JSON form: per-step scores and the overall means."""
        steps = self.steps()
        return {
            "specification": self.specification,
            "label": self.label,
            "failure": self.failure,
            "origins": [f.origin.isoformat() for f in self.forecasts],
            "overall": _overall(steps, self.levels) if steps else None,
            "steps": [_step_dict(s) for s in steps],
            "fit_seconds": self.fit_seconds,
            "refilter_seconds": self.refilter_seconds,
            "warnings": [{"code": w.code, "message": w.message} for w in self.warnings],
        }


def _nanmean(values: np.ndarray, actual: np.ndarray) -> float:
    """Mean over entries whose actual value is known; NaN if none is."""
    keep = np.isfinite(np.asarray(actual, dtype=float)) & np.isfinite(values)
    return float(np.mean(values[keep])) if keep.any() else float("nan")


def _level_key(level: float) -> str:
    return f"{level:g}"


def _step_dict(s: StepScores) -> dict[str, Any]:
    return {
        "step": s.step,
        "mae": _num(s.mae),
        "rmse": _num(s.rmse),
        "mase": _num(s.mase),
        "smape": _num(s.smape),
        "coverage": {_level_key(k): _num(v) for k, v in s.coverage.items()},
        "msis": {_level_key(k): _num(v) for k, v in s.msis.items()},
    }


def _overall(steps: Sequence[StepScores], levels: Sequence[float]) -> dict[str, Any]:
    def mean(values: list[float]) -> float | None:
        arr = np.array(values, dtype=float)
        arr = arr[np.isfinite(arr)]
        return float(arr.mean()) if arr.size else None

    return {
        "mae": mean([s.mae for s in steps]),
        "rmse": mean([s.rmse for s in steps]),
        "mase": mean([s.mase for s in steps]),
        "smape": mean([s.smape for s in steps]),
        "coverage": {_level_key(v): mean([s.coverage[v] for s in steps]) for v in levels},
        "msis": {_level_key(v): mean([s.msis[v] for s in steps]) for v in levels},
    }


def _num(value: float) -> float | None:
    return float(value) if np.isfinite(value) else None


@dataclass(frozen=True)
class Task:
    """One specification to evaluate over a plan: a picklable unit for a process pool."""

    specification: Specification
    y: pd.Series
    seasonal_period: int
    plan: Plan
    coverage: tuple[float, ...]
    scale_period: int = 1
    fit_end: int | None = None
    """Estimate on the points before this position (default: the first origin); never later."""


def evaluate(task: Task) -> ModelBacktest:
    """Fit once before the first origin, re-filter through the rest; failures become data."""
    spec, y, plan = task.specification, task.y, task.plan
    caught: list[FitWarning] = []
    label = spec.family
    fit_seconds = refilter_seconds = 0.0
    forecasts: list[OriginForecast] = []
    try:
        with warnings.catch_warnings(record=True) as seen:
            warnings.simplefilter("always")
            start = time.perf_counter()
            # Never estimate on points after the first origin: that would peek.
            fit_end = min(task.fit_end or plan.origins[0], plan.origins[0])
            fitted = spec.fit(y.iloc[:fit_end], task.seasonal_period)
            fit_seconds = time.perf_counter() - start
            label = fitted.describe().label
            start = time.perf_counter()
            for origin in plan.origins:
                current = fitted if origin == fit_end else fitted.refilter(y.iloc[:origin])
                forecasts.append(_one_origin(current, y, origin, plan.horizon, task))
            refilter_seconds = time.perf_counter() - start
        caught.extend(_as_fit_warnings(seen))
        caught.extend(fitted.warnings)
    except (ValueError, ArithmeticError, LookupError, RuntimeError, TypeError) as exc:
        # Library errors from a candidate are data here: the candidate drops out with a reason.
        return _failed(spec, label, task.coverage, f"{type(exc).__name__}: {exc}", caught)
    if any(not np.all(np.isfinite(f.point)) for f in forecasts):
        return _failed(spec, label, task.coverage, "non-finite forecast", caught)
    return ModelBacktest(
        as_dict(spec),
        label,
        tuple(forecasts),
        task.coverage,
        fit_seconds,
        refilter_seconds,
        tuple(_unique(caught)),
        resolved=resolved_specification(fitted),
        refit=_refit_specification(fitted),
    )


def _refit_specification(fitted: Any) -> Any:
    narrowed = getattr(fitted, "refit_specification", None)
    return narrowed() if callable(narrowed) else None


def resolved_specification(fitted: Any) -> Any:
    """The complete specification behind a fitted model: a family that searches (ETS keeps it
    as ``chosen``) settles on one; wrappers (combination, transform) resolve what they hold;
    the rest are complete already."""
    chosen = getattr(fitted, "chosen", None)
    if chosen is not None:
        return chosen
    members = getattr(fitted, "members", None)
    spec = fitted.specification
    is_instance = dataclasses.is_dataclass(spec) and not isinstance(spec, type)
    inner = getattr(fitted, "inner", None)
    if inner is not None and is_instance and spec.family == "transformed":
        # A model on a transformed scale resolves its base (the transform stays as asked).
        return dataclasses.replace(spec, base=resolved_specification(inner))
    if members and is_instance and hasattr(spec, "members"):
        # A combination resolves member by member (each ETS member settled its own season).
        return dataclasses.replace(spec, members=tuple(resolved_specification(m) for m in members))
    orders = getattr(fitted, "orders", None)
    if orders is not None and is_instance and hasattr(spec, "order"):
        # ARIMA keeps the searched orders beside its (possibly order-less) specification.
        return dataclasses.replace(
            spec,
            order=(orders.p, orders.d, orders.q),
            seasonal_order=(orders.P, orders.D, orders.Q),
            include_constant=orders.constant,
        )
    return spec


def _one_origin(fitted: Any, y: pd.Series, origin: int, horizon: int, task: Task) -> OriginForecast:
    fc = fitted.forecast(horizon, task.coverage)
    history = y.to_numpy(dtype=float)[:origin]
    return OriginForecast(
        origin=y.index[origin],
        actual=y.to_numpy(dtype=float)[origin : origin + horizon],
        point=np.asarray(fc.point, dtype=float),
        lower={iv.coverage: np.asarray(iv.lower, dtype=float) for iv in fc.intervals},
        upper={iv.coverage: np.asarray(iv.upper, dtype=float) for iv in fc.intervals},
        scale=_positive_scale(history, task.scale_period),
    )


def _positive_scale(history: np.ndarray, period: int) -> float:
    """The MASE scale, with fallbacks so a flat stretch cannot divide by zero."""
    scale = mase_scale(history, period)
    if not np.isfinite(scale) or scale <= 0:
        scale = mase_scale(history, 1)
    if not np.isfinite(scale) or scale <= 0:
        finite = history[np.isfinite(history)]
        scale = float(np.mean(np.abs(finite))) if finite.size else 1.0
    return scale if scale > 0 else 1.0


def _failed(
    spec: Specification, label: str, levels: tuple[float, ...], why: str, seen: list[FitWarning]
) -> ModelBacktest:
    return ModelBacktest(as_dict(spec), label, (), levels, 0.0, 0.0, tuple(seen), why)


def _as_fit_warnings(seen: Iterable[warnings.WarningMessage]) -> list[FitWarning]:
    return [FitWarning(w.category.__name__, str(w.message)) for w in seen]


def _unique(items: Iterable[FitWarning]) -> list[FitWarning]:
    out: list[FitWarning] = []
    for item in items:
        if item not in out:
            out.append(item)
    return out


@dataclass(frozen=True)
class RankEntry:
    """A model's place in the ranking by the chosen metric."""

    label: str
    specification: dict[str, Any]
    score: float


@dataclass(frozen=True)
class BacktestReport:
    """POST /v1/backtests: every model's per-step scores and a ranking by ``metric``."""

    metric: str
    horizon: int
    step: int
    origins: tuple[pd.Timestamp, ...]
    coverage: tuple[float, ...]
    models: tuple[ModelBacktest, ...]
    ranking: tuple[RankEntry, ...] = field(default=())

    def to_dict(self) -> dict[str, Any]:
        """JSON form of the whole report."""
        return {
            "metric": self.metric,
            "horizon": self.horizon,
            "step": self.step,
            "origins": [o.isoformat() for o in self.origins],
            "coverage": list(self.coverage),
            "models": [m.to_dict() for m in self.models],
            "ranking": [
                {"label": r.label, "specification": r.specification, "score": _num(r.score)}
                for r in self.ranking
            ],
        }


def rank(models: Sequence[ModelBacktest], metric: str) -> tuple[RankEntry, ...]:
    """Working models by ascending score; ties keep the input order (deterministic)."""
    scored = [(m.score(metric), i, m) for i, m in enumerate(models) if m.ok]
    scored.sort(key=lambda t: (t[0], t[1]))
    return tuple(RankEntry(m.label, m.specification, s) for s, _, m in scored)


def run(
    y: pd.Series,
    specifications: Sequence[Specification],
    seasonal_period: int,
    plan: Plan,
    coverage: Sequence[float],
    map_fn: MapFn[Task, ModelBacktest] | None = None,
    periods: Sequence[int] | None = None,
    fit_end: int | None = None,
) -> list[ModelBacktest]:
    """Evaluate every specification over one plan, through ``map_fn`` when given.

    ``periods`` overrides the period each specification is fitted with (default
    ``seasonal_period`` for all); the MASE scale always uses ``seasonal_period``.
    """
    levels = check_coverage(coverage)
    fit_periods = list(periods) if periods is not None else [seasonal_period] * len(specifications)
    tasks = [
        Task(s, y, p, plan, levels, seasonal_period, fit_end)
        for s, p in zip(specifications, fit_periods, strict=True)
    ]
    mapper = map_fn or map
    return list(mapper(evaluate, tasks))


def backtest(
    y: pd.Series,
    specifications: Sequence[Specification],
    seasonal_period: int = 1,
    *,
    horizon: int,
    origins: int = 3,
    step: int = 1,
    coverage: Sequence[float] = (0.8, 0.95),
    metric: str = "mase",
    map_fn: MapFn[Task, ModelBacktest] | None = None,
    periods: Sequence[int] | None = None,
) -> BacktestReport:
    """Rolling-origin evaluation of the given specifications (POST /v1/backtests);
    ``periods`` as in ``run``."""
    check_metric(metric)
    if not specifications:
        raise RequestError("give at least one specification", field="models")
    plan = plan_origins(len(y), horizon, origins, step, seasonal_period)
    levels = check_coverage(coverage)
    models = run(y, specifications, seasonal_period, plan, levels, map_fn, periods)
    return BacktestReport(
        metric=metric,
        horizon=horizon,
        step=step,
        origins=tuple(y.index[o] for o in plan.origins),
        coverage=levels,
        models=tuple(models),
        ranking=rank(models, metric),
    )
