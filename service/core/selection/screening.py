"""Which backtested candidates may make the forecast: each forecast, at every backtest origin
and from the whole series, must stay within the plausible band around its history
(models/plausibility.py); a member that leaves it is marked failed and the choice is made
again without it, so that what is scored is what is delivered."""

from __future__ import annotations

import dataclasses
import re
from collections.abc import Sequence

import numpy as np
import pandas as pd

from service.core.errors import FitError
from service.core.evaluation.origins import Plan
from service.core.evaluation.records import ModelBacktest, rank
from service.core.models.base import FitWarning, Forecast, Specification
from service.core.models.intervals import Interval
from service.core.models.plausibility import implausible, point_implausible
from service.core.selection.choice import Choice, choose, disjoint_windows


def plausible_choice(
    results: list[ModelBacktest],
    specs: Sequence[Specification],
    metric: str,
    default_set: bool,
    plan: Plan,
    final: tuple[pd.Series, int, tuple[float, ...]],
    trim: float | None = None,
) -> Choice:
    """The choice among the working candidates; a member whose forecast from the whole series
    leaves the plausible band is marked failed (in ``results``) and the choice is made again
    without it, so that what is scored is what is delivered."""
    y, horizon, levels = final
    windows = disjoint_windows(plan.origins, plan.horizon)
    while True:
        order = sorted(
            (i for i, r in enumerate(results) if r.ok), key=lambda i: (results[i].score(metric), i)
        )
        if not order:
            raise FitError(_nothing_left(results), field="series.values")
        ranking = rank(results, metric)
        picked = choose(results, specs, order, metric, ranking, default_set, windows, trim)
        problems = {i: final_problem(results[i], y, horizon, levels) for i in picked.members}
        if not any(problems.values()):
            return picked
        for i, why in problems.items():
            if why is not None:
                results[i] = dataclasses.replace(results[i], failure=why)


POINTS_ONLY = frozenset({"naive", "seasonal_naive"})
"""Screened on their points alone: their intervals are the random walk's own, as wide as its
steps say over a long horizon, and these forecasts are the last resort of the choice."""


def _problem(result: ModelBacktest, forecast: Forecast, history: np.ndarray) -> str | None:
    if result.specification.get("family") in POINTS_ONLY:
        return point_implausible(forecast.point, history)
    return implausible(forecast, history)


def _nothing_left(results: Sequence[ModelBacktest]) -> str:
    """The refusal when every candidate failed, naming the simplest one's reason."""
    last = next((r for r in results if r.specification.get("family") == "naive"), results[-1])
    why = f"no candidate could be fitted to this series ({last.label}: {last.failure})"
    if "transform" in last.specification:
        why += "; without the transform the naive forecast would answer"
    return why


def final_problem(
    result: ModelBacktest, y: pd.Series, horizon: int, levels: tuple[float, ...]
) -> str | None:
    """Why a candidate's forecast from the whole series is implausible (None when fine)."""
    if result.delivered is None:
        return None
    try:
        final = result.delivered.forecast(horizon, levels)
    except (ValueError, ArithmeticError, LookupError) as exc:
        return f"its forecast from the whole series failed ({exc})"
    why = _problem(result, final, y.to_numpy(dtype=float))
    return None if why is None else f"{why} (from the whole series)"


def screened(result: ModelBacktest, y: pd.Series) -> ModelBacktest:
    """The record marked failed when a forecast at any origin left the plausible band."""
    if not result.ok:
        return result
    values = y.to_numpy(dtype=float)
    for f in result.forecasts:
        intervals = tuple(Interval(v, f.lower[v], f.upper[v]) for v in result.levels)
        forecast = Forecast(pd.RangeIndex(len(f.point)), f.point, intervals)
        why = _problem(result, forecast, values[: y.index.get_loc(f.origin)])
        if why is not None:
            return dataclasses.replace(result, failure=f"{why} at {f.origin.isoformat()}")
    return result


def left_out(results: Sequence[ModelBacktest]) -> FitWarning | None:
    """The warning ``failed_candidate`` when candidates could not be fitted at all (a series
    with kept gaps, data a family refuses): the forecast then comes from fewer models than
    the profile called for, and the caller should know which and why."""
    failed: dict[str, list[str]] = {}
    for r in results:
        if r.failure is not None:
            reason = re.sub(r"^[A-Za-z]*Error: ", "", r.failure)
            failed.setdefault(reason, []).append(r.label)
    if not failed:
        return None
    count = sum(len(labels) for labels in failed.values())
    why = "; ".join(f"{', '.join(labels)} ({reason})" for reason, labels in failed.items())
    return FitWarning(
        "failed_candidate",
        f"model auto left out {count} of the {len(results)} models it meant to compare, "
        f"which could not be fitted to this series: {why}",
    )
