"""Automatic model selection: candidates from the profile, ranked by a rolling-origin backtest.

Rules (stated for DEVELOPERS.md):
- Within a family the family's own search decides (ETS by AICc over the taxonomy, ARIMA by
  the stepwise AICc search, Theta, STL + ETS for seasons longer than 24, Croston/SBA for
  intermittent series), run on the data before the first origin only.
- Across families: ``origins`` (default 3) rolling origins at the requested horizon, ``step``
  apart (``horizon`` when the series allows it, shrinking to 1, then fewer origins), with at
  least max(10, 3m) points before the first origin (10 when non-seasonal); when even one
  origin does not fit, the longest horizon that fits is used, with the warning
  ``backtest_horizon_shortened``. Scored by ``metric`` (mase, default | smape | rmse | mae).
  Each candidate is estimated once, before the first origin, and re-filtered forward.
- Ranking: scaled errors pooled over every origin of the dense plan (the selection origins
  plus the calibration origins between the first and n − h): more origins, same estimates.
- Choice (choice.py): the combination of every non-benchmark candidate (ETS, Theta, ARIMA,
  the SES/Holt/damped average, ...) weighted by the inverse square of its backtest score, by
  default; a single model only with a 10 % lower score, a majority of origins and >= 5
  disjoint windows. Drift is only a benchmark.
- Naive guard: when the series is judged a random walk and the chosen model's score is not at
  least 5 % better than the naive forecast's (1 − score/score(naive) < 0.05), the naive
  forecast is returned with ``no_skill_over_naive``.
- skill_over_naive = 1 − score(chosen) / score(benchmark), the benchmark being seasonal naive
  for a seasonal series and naive otherwise.
- Calibration: the same estimates are re-filtered through up to 8 origins between the first
  selection origin and n − h; with >= 5 origins the intervals are widened by per-level
  split-conformal factors (calibration.py; never narrowed). Short series fall back to origins
  starting at half the series, fitted there, and to the model's own intervals below 5 origins.
- The refit runs each member's own search again on the full series (the backtest scored the
  search procedure, not the structure it settled on before the first origin).

The figures behind these rules, and the rules tried and dropped, are in
tests/benchmarks/RESULTS.md.
"""

from __future__ import annotations

import dataclasses
import time
from collections.abc import Sequence
from typing import Any

import pandas as pd

from service.core.checks import check_coverage, check_positive_int
from service.core.errors import FitError, RequestError
from service.core.evaluation import calibration as cal
from service.core.evaluation.backtest import MapFn, Task, run
from service.core.evaluation.origins import (
    MINIMUM_ORIGINS,
    calibration_plan,
    dense_plan,
    feasible_plan,
)
from service.core.evaluation.records import ModelBacktest, rank
from service.core.evaluation.scoring import check_metric
from service.core.models.base import (
    FitWarning,
    Forecast,
    Specification,
    family_of,
)
from service.core.models.intervals import Interval
from service.core.selection.averaging import combine
from service.core.selection.candidates import (
    CandidateSet,
    SeriesProfile,
    candidates_for,
    profile_series,
)
from service.core.selection.choice import choose, disjoint_windows
from service.core.selection.outcome import AutoForecast, Selection
from service.core.selection.plausibility import implausible
from service.core.selection.refit import for_refit, model_periods, refit
from service.core.selection.skill import (
    SKILL_MARGIN,
    benchmark_of,
    guarded_benchmark,
    skill,
    with_benchmarks,
)

MAX_HISTORY = 5000
"""auto estimates on at most the latest max(MAX_HISTORY, 4m) points: its cost grows with the
length while points that old add little to a forecast of the next few seasons (common
practice)."""


def select(
    y: pd.Series,
    seasonal_period: int,
    horizon: int,
    coverage: Sequence[float] = (0.8, 0.95),
    *,
    metric: str = "mase",
    origins: int = 3,
    candidates: Sequence[Specification] | None = None,
    diagnostics: Any | None = None,
    map_fn: MapFn[Task, ModelBacktest] | None = None,
    thorough: bool = False,
) -> AutoForecast:
    """Model "auto": choose by backtest, refit on the full series, forecast, calibrate.

    ``thorough`` adds the (slow) stepwise ARIMA search to the candidates; ``map_fn`` fans
    the candidate evaluations out (the runtime passes its pool's map).
    """
    clock = _Clock()
    check_positive_int(horizon, "horizon")
    check_positive_int(origins, "origins")
    check_positive_int(seasonal_period, "series.seasonal_period")
    check_metric(metric)
    levels = check_coverage(coverage)
    full_length = len(y)
    y = recent_history(y, seasonal_period)
    profile = profile_series(y, seasonal_period, diagnostics)
    chosen_set = candidates_for(profile, thorough) if candidates is None else _given(candidates)
    specs = with_benchmarks(list(chosen_set.specifications), profile)
    clock.lap("profile")

    plan, shortened = feasible_plan(len(y), horizon, origins, profile.benchmark_period)
    periods = model_periods(specs, profile)
    # One estimation per candidate serves both the ranking (the selection origins) and the
    # calibration (denser origins between the first and the last): only re-filtering is added.
    evaluation_plan = dense_plan(
        plan,
        calibration_plan(len(y), plan.horizon, profile.benchmark_period, first=plan.origins[0]),
    )
    dense = run(y, specs, profile.benchmark_period, evaluation_plan, levels, map_fn, periods)
    dense = [_screened(r, y) for r in dense]
    # The ranking pools the scaled errors over every origin of the dense plan: more origins
    # for the same estimates, so one lucky window decides less.
    ranked_origins = evaluation_plan.origins
    results = [r.at({y.index[o] for o in ranked_origins}) for r in dense]
    clock.lap("backtest")

    ranking = rank(results, metric)
    order = sorted(
        (i for i, r in enumerate(results) if r.ok), key=lambda i: (results[i].score(metric), i)
    )
    if not order:
        raise FitError("no candidate could be fitted to this series", field="series.values")
    failures = tuple((r.label, r.failure or "") for r in results if not r.ok)
    bench = results[specs.index(benchmark_of(specs, profile))]
    bench_score = bench.score(metric)

    picked = choose(
        results,
        specs,
        order,
        metric,
        ranking,
        candidates is None,
        disjoint_windows(ranked_origins, plan.horizon),
    )
    rule, members, ranking = picked.rule, list(picked.members), picked.ranking
    weights = picked.weights
    chosen_bt = _merged([results[i] for i in members], weights)
    skill_score = skill(chosen_bt.score(metric), bench_score)

    extra: list[FitWarning] = []
    if len(y) < full_length:
        extra.append(
            FitWarning(
                "history_shortened",
                f"model auto estimated its candidates on the latest {len(y)} of the "
                f"{full_length} points: older points cost time and add little to the forecast",
            )
        )
    if shortened:
        extra.append(
            FitWarning(
                "backtest_horizon_shortened",
                f"the series is too short to backtest {horizon} steps ahead; candidates were "
                f"compared {plan.horizon} steps ahead instead",
            )
        )
    guard = guarded_benchmark(profile)
    guard_family, message = guard or ("naive", "")
    naive_index = next(
        (i for i, s in enumerate(specs) if family_of(s) == guard_family),
        next(i for i, s in enumerate(specs) if family_of(s) == "naive"),
    )
    over_naive = skill(chosen_bt.score(metric), results[naive_index].score(metric))
    if guard and (over_naive is None or over_naive < SKILL_MARGIN):
        rule, members, weights = "naive_guard", [naive_index], ()
        chosen_bt = results[naive_index]
        skill_score = skill(chosen_bt.score(metric), bench_score)
        extra.append(FitWarning("no_skill_over_naive", message))

    # The structure each family's search chose before the first origin is kept; only its
    # parameters are estimated again on the full series: no second search.
    member_specs = [dense[i].resolved or specs[i] for i in members]
    calibration = _calibrate(
        y,
        member_specs,
        weights,
        profile,
        _merged([dense[i] for i in members], weights),
        plan.horizon,
        levels,
        map_fn,
    )
    clock.lap("calibration")

    # The family's own search runs again on the full series: the backtest scored the search
    # procedure, and a structure settled on the early part alone forecast worse.
    fitted, dropped = refit(
        y,
        [for_refit(specs[i], dense[i]) for i in members],
        weights,
        profile,
        (horizon, levels),
    )
    extra.extend(dropped)
    clock.lap("refit")
    forecast = cal.apply(fitted.forecast(horizon, levels), calibration)
    clock.lap("forecast")

    selection = Selection(
        metric=metric,
        rule=rule,
        chosen=chosen_bt.label,
        ranking=ranking,
        benchmark=bench.label,
        skill_over_naive=skill_score,
        horizon=plan.horizon,
        step=plan.step,
        origins=tuple(y.index[o] for o in ranked_origins),
        calibration=calibration,
        candidates=chosen_set,
        profile=profile,
        failures=failures,
        observations_used=len(y),
        candidate_seconds=tuple((r.label, r.fit_seconds, r.refilter_seconds) for r in dense),
    )
    warnings_out = tuple(extra) + tuple(fitted.warnings)
    return AutoForecast(fitted, forecast, selection, warnings_out, clock.laps)


class _Clock:
    """Seconds per stage, for the speed benchmark and the logs."""

    def __init__(self) -> None:
        self.laps: dict[str, float] = {}
        self._last = time.perf_counter()

    def lap(self, name: str) -> None:
        now = time.perf_counter()
        self.laps[name] = now - self._last
        self._last = now


def recent_history(y: pd.Series, seasonal_period: int) -> pd.Series:
    """The latest max(MAX_HISTORY, 4m) points of ``y`` (all of it when shorter)."""
    keep = max(MAX_HISTORY, 4 * seasonal_period)
    return y.iloc[-keep:] if len(y) > keep else y


def _given(candidates: Sequence[Specification]) -> CandidateSet:
    if not candidates:
        raise RequestError("candidates must not be empty", field="candidates")
    return CandidateSet(tuple(candidates), tuple("requested" for _ in candidates))


def _merged(members: Sequence[ModelBacktest], weights: Sequence[float] = ()) -> ModelBacktest:
    return combine(members, weights=weights) if len(members) > 1 else members[0]


def _calibrate(
    y: pd.Series,
    specs: Sequence[Specification],
    weights: Sequence[float],
    profile: SeriesProfile,
    dense: ModelBacktest,
    horizon: int,
    levels: tuple[float, ...],
    map_fn: MapFn[Task, ModelBacktest] | None,
) -> cal.Calibration:
    """Coverage and factors from the dense backtest, or from an earlier-starting one when the
    selection origins leave too little room (short series: the extra fits are cheap there)."""
    if len(dense.forecasts) >= MINIMUM_ORIGINS:
        return cal.calibrate(dense)
    longer = calibration_plan(len(y), horizon, profile.benchmark_period)
    if longer is None:
        return cal.calibrate(dense)
    results = run(
        y, specs, profile.benchmark_period, longer, levels, map_fn, model_periods(specs, profile)
    )
    if not all(r.ok for r in results):
        return cal.calibrate(dense)
    return cal.calibrate(_merged(results, weights))


def _screened(result: ModelBacktest, y: pd.Series) -> ModelBacktest:
    """The record marked failed when a forecast at any origin left the plausible band."""
    if not result.ok:
        return result
    values = y.to_numpy(dtype=float)
    for f in result.forecasts:
        intervals = tuple(Interval(v, f.lower[v], f.upper[v]) for v in result.levels)
        forecast = Forecast(pd.RangeIndex(len(f.point)), f.point, intervals)
        why = implausible(forecast, values[: y.index.get_loc(f.origin)])
        if why is not None:
            return dataclasses.replace(result, failure=f"{why} at {f.origin.isoformat()}")
    return result


def backtest_auto(
    y: pd.Series,
    seasonal_period: int,
    *,
    horizon: int,
    origins: int = 3,
    step: int = 1,
    coverage: Sequence[float] = (0.8, 0.95),
    metric: str = "mase",
    diagnostics: Any | None = None,
    map_fn: MapFn[Task, ModelBacktest] | None = None,
    thorough: bool = False,
) -> Any:
    """POST /v1/backtests with specifications "auto": the candidates ``select`` would try."""
    from service.core.evaluation.backtest import backtest

    check_metric(metric)
    profile = profile_series(y, seasonal_period, diagnostics)
    specs = with_benchmarks(list(candidates_for(profile, thorough).specifications), profile)
    return backtest(
        y,
        specs,
        profile.benchmark_period,
        horizon=horizon,
        origins=origins,
        step=step,
        coverage=coverage,
        metric=metric,
        map_fn=map_fn,
        periods=model_periods(specs, profile),
    )
