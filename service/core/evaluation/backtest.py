"""Rolling-origin evaluation that does not peek.

Each specification is fitted on the data before the first origin; its parameters are then
held fixed and re-filtered (``fitted.refilter``) forward through the later origins (DESIGN,
'Backtests must not peek'), or estimated again at the positions ``Task.refit_at`` names (the
selection's origins: each origin forecasts from the latest estimate made before it, as the
delivered forecast comes from an estimate on all the data). Origins end at the last point: the
last window covers the final ``horizon`` points and earlier origins lie ``step`` points apart.
ETS, ARIMA, their transforms and combinations forecast from several origins in one pass over
the series (``models.base.origin_forecasts``: the same numbers as one re-filter per origin).
"""

from __future__ import annotations

import dataclasses
import time
from collections.abc import Callable, Iterable, Sequence
from dataclasses import dataclass
from typing import Any, TypeVar

import numpy as np
import pandas as pd

from service.core.checks import check_coverage
from service.core.errors import RequestError
from service.core.evaluation.origins import Plan, plan_origins
from service.core.evaluation.records import (
    BacktestReport,
    ModelBacktest,
    OriginForecast,
    rank,
)
from service.core.evaluation.scoring import (
    check_metric,
    mase_scale,
)
from service.core.models.base import (
    FitWarning,
    Forecast,
    Specification,
    as_dict,
    origin_forecasts,
)
from service.core.models.library_warnings import captured, unique_warnings

T = TypeVar("T")
R = TypeVar("R")
MapFn = Callable[[Callable[[T], R], Sequence[T]], Iterable[R]]
"""Like the builtin ``map``: the runtime may pass its pool's map to fan candidates out."""


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
    settle: str = ""
    """Also fit the model a forecast would deliver, on the whole series, with the structure
    (orders, components, adjustment) scored here: "whole" lets the family's search settle it
    on the whole series and re-estimates it before the first origin (only the parameters are
    kept from peeking); "early" settles it before the first origin, as scored, and
    re-estimates it on the whole series (for a costly search: ARIMA's). "" fits nothing more."""
    refit_at: tuple[int, ...] = ()
    """Positions after the first estimate where the settled structure is estimated again on the
    points before them; each origin forecasts from the latest estimate at or before it."""


def evaluate(task: Task) -> ModelBacktest:
    """Fit before the first origin (and at ``refit_at``), re-filter through the rest;
    failures become data."""
    spec, y, plan = task.specification, task.y, task.plan
    caught: list[FitWarning] = []
    label = spec.family
    fit_seconds = refilter_seconds = 0.0
    forecasts: list[OriginForecast] = []
    try:
        with captured(caught):
            start = time.perf_counter()
            delivered = spec.fit(y, task.seasonal_period) if task.settle == "whole" else None
            scored = spec if delivered is None else settled_specification(delivered)
            # Never estimate on points after the first origin: that would peek.
            fit_end = min(task.fit_end or plan.origins[0], plan.origins[0])
            fitted = scored.fit(y.iloc[:fit_end], task.seasonal_period)
            if task.settle == "early":
                delivered = settled_specification(fitted).fit(y, task.seasonal_period)
            estimates = [(fit_end, fitted), *_estimated_again(fitted, y, fit_end, task)]
            fit_seconds = time.perf_counter() - start
            label = label_of(fitted)
            start = time.perf_counter()
            at: dict[int, Forecast] = {}
            # Each origin forecasts from the latest estimate at or before it (the first
            # estimate also serves any origin before it).
            ends = [end for end, _ in estimates[1:]] + [len(y) + 1]
            for k, (end, estimate) in enumerate(estimates):
                group = [o for o in plan.origins if (k == 0 or o >= end) and o < ends[k]]
                at.update(_forecasts_from(estimate, end, y, group, task))
            forecasts.extend(_one_origin(at[o], y, o, plan.horizon, task) for o in plan.origins)
            refilter_seconds = time.perf_counter() - start
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
        tuple(unique_warnings(caught)),
        resolved=resolved_specification(delivered if delivered is not None else fitted),
        delivered=delivered,
    )


def _estimated_again(fitted: Any, y: pd.Series, fit_end: int, task: Task) -> list[tuple[int, Any]]:
    """The settled structure estimated again before each of ``task.refit_at`` (ascending); where
    that fails, the earlier estimate goes on re-filtering (it forecast there already)."""
    ends = sorted({p for p in task.refit_at if fit_end < p <= task.plan.origins[-1]})
    if not ends:
        return []
    again = settled_specification(fitted)
    out: list[tuple[int, Any]] = []
    for end in ends:
        try:
            out.append((end, again.fit(y.iloc[:end], task.seasonal_period)))
        except (ValueError, ArithmeticError, LookupError, RuntimeError, TypeError):
            continue
    return out


def _forecasts_from(
    fitted: Any, end: int, y: pd.Series, origins: list[int], task: Task
) -> dict[int, Forecast]:
    """Forecasts from ``origins`` by one estimate re-filtered forward; a family may forecast
    from all of them in one pass over the series (the same numbers: base.origin_forecasts),
    the estimation's own end among them (one pass instead of a second filter)."""
    at: dict[int, Forecast] = {}
    one_pass = callable(getattr(fitted, "origin_forecasts", None))
    if end in origins and not one_pass:
        at[end] = fitted.forecast(task.plan.horizon, task.coverage)
    later = [origin for origin in origins if origin not in at]
    moved = origin_forecasts(fitted, y, later, task.plan.horizon, task.coverage)
    at.update(zip(later, moved, strict=True))
    return at


def label_of(fitted: Any) -> str:
    """The fitted model's label: its own ``label`` where a family keeps one (ARIMA's would
    otherwise filter the series and test its residuals only to be named), else described."""
    own = getattr(fitted, "label", None)
    return own if isinstance(own, str) else str(fitted.describe().label)


def settled_specification(fitted: Any) -> Any:
    """The structure a fitted model settled on, to be estimated on another history: a family
    may offer a cheaper form (ETS: its exact estimates as the optimiser's start)."""
    settled = getattr(fitted, "settled_specification", None)
    found = settled() if callable(settled) else None
    return found if found is not None else resolved_specification(fitted)


def resolved_specification(fitted: Any) -> Any:
    """The complete specification behind a fitted model: a family that searches (ETS keeps it
    as ``chosen``) settles on one; wrappers (combination, transform) resolve what they hold;
    the rest are complete already."""
    chosen = getattr(fitted, "chosen", None)
    if chosen is not None:
        return chosen
    structure = getattr(fitted, "settled_structure", None)
    if callable(structure):
        # A family whose fit decides what its specification leaves open (Theta's seasonal
        # adjustment) states what it decided.
        return structure()
    members = getattr(fitted, "members", None)
    spec = fitted.specification
    is_instance = dataclasses.is_dataclass(spec) and not isinstance(spec, type)
    base = getattr(fitted, "base", None)
    if base is not None and is_instance and hasattr(spec, "base") and spec.family == "stl":
        # STL settles its base model's structure on the adjusted series.
        return dataclasses.replace(spec, base=resolved_specification(base))
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
            constant=("mean" if orders.d + orders.D == 0 else "drift")
            if orders.constant
            else "none",
        )
    return spec


def _one_origin(
    fc: Forecast, y: pd.Series, origin: int, horizon: int, task: Task
) -> OriginForecast:
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


def run(
    y: pd.Series,
    specifications: Sequence[Specification],
    seasonal_period: int,
    plan: Plan,
    coverage: Sequence[float],
    map_fn: MapFn[Task, ModelBacktest] | None = None,
    periods: Sequence[int] | None = None,
    fit_end: int | None = None,
    settle: Callable[[Specification], str] | None = None,
    refit_at: Sequence[int] = (),
) -> list[ModelBacktest]:
    """Evaluate every specification over one plan, through ``map_fn`` when given.

    ``periods`` overrides the period each specification is fitted with (default
    ``seasonal_period`` for all); the MASE scale always uses ``seasonal_period``;
    ``refit_at`` as in ``Task``.
    """
    levels = check_coverage(coverage)
    fit_periods = list(periods) if periods is not None else [seasonal_period] * len(specifications)
    tasks = [
        Task(
            s,
            y,
            p,
            plan,
            levels,
            seasonal_period,
            fit_end,
            settle(s) if settle else "",
            tuple(refit_at),
        )
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
    estimation: str = "first_origin",
) -> BacktestReport:
    """Rolling-origin evaluation of the given specifications (POST /v1/backtests);
    ``periods`` as in ``run``; ``estimation`` one of ``ESTIMATIONS``."""
    check_metric(metric)
    check_estimation(estimation)
    if not specifications:
        raise RequestError("give at least one specification", field="models")
    plan = plan_origins(len(y), horizon, origins, step, seasonal_period)
    levels = check_coverage(coverage)
    again = plan.origins[1:] if estimation == "every_origin" else ()
    models = run(y, specifications, seasonal_period, plan, levels, map_fn, periods, refit_at=again)
    return BacktestReport(
        metric=metric,
        horizon=horizon,
        step=step,
        origins=tuple(y.index[o] for o in plan.origins),
        coverage=levels,
        models=tuple(models),
        ranking=rank(models, metric),
        estimation=estimation,
    )


ESTIMATIONS = ("first_origin", "every_origin")
"""Where a backtest estimates each model: once, on the data before the first origin, its
parameters then re-filtered through the later origins (fast, the default); or again on the
data before every origin (as a forecast made at that time would be; one fit per origin)."""


def check_estimation(estimation: str) -> str:
    """One of ``ESTIMATIONS``."""
    if estimation not in ESTIMATIONS:
        raise RequestError(
            f"estimation must be one of {', '.join(ESTIMATIONS)}; got {estimation!r}",
            field="estimation",
        )
    return estimation
