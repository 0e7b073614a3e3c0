"""Automatic model selection: candidates from the profile, ranked by a rolling-origin backtest.

Rules (stated for DEVELOPERS.md):
- Within a family the family's own search decides (ETS by AICc over the taxonomy, ARIMA by
  the stepwise AICc search, Theta, STL + ETS for seasons longer than 24, Croston/SBA for
  intermittent series). It runs on the whole series, and the structure it settles on is
  what the backtest scores, re-estimated before each selection origin (ARIMA: its orders are
  settled before the first origin and re-estimated on the whole series; delivered.py). The
  delivered forecast is the scored one: ``selection.chosen`` is the delivered model's label.
- Across families: ``origins`` (default 3) rolling origins at the requested horizon, ``step``
  apart (``horizon`` when the series allows it, shrinking to 1, then fewer origins), with at
  least max(10, 3m) points before the first origin (10 when non-seasonal); when even one
  origin does not fit, the longest horizon that fits is used, with the warning
  ``backtest_horizon_shortened``. Scored by ``metric`` (mase, default | smape | rmse | mae).
  Each candidate is estimated before the first origin and again before each later selection
  origin (where the new points are >= 2 % of those of the latest estimate), and re-filtered
  forward from the latest estimate to the origins between them.
- Ranking: scaled errors pooled over every origin of the dense plan (the selection origins
  plus the calibration origins between the first and n − h): more origins, same estimates
  (each calibration origin re-filters the latest estimate before it).
- Choice (choice.py): the combination of every non-benchmark candidate (ETS, Theta, ARIMA,
  the SES/Holt/damped average, ...) by default, weighted 70 % by the inverse square of its
  backtest score and 30 % by the stacked weights (stacking.py: those that minimise the
  combination's own backtest error); a single model only with a 10 % lower score, a majority
  of origins and >= 5 disjoint windows. Drift is only a benchmark (the random-walk guard may
  deliver it).
- Guards (guard.py): the naive (seasonal naive) forecast for a (seasonal) random walk without
  5 % skill over it (the drift forecast instead of naive when carrying the average step pays:
  skill.drift_pays); the benchmark mixed in when the chosen forecast does not beat it;
  ``no_skill_over_naive`` whenever the delivered skill is <= 0. Short series: short_series.py.
- Plausibility (screening.py): a candidate whose forecast leaves the band around its history,
  at a backtest origin or from the whole series, is left out and the choice made again.
- skill_over_naive = 1 − score(chosen) / score(benchmark), the benchmark being seasonal naive
  for a seasonal series and naive otherwise.
- Calibration: the same estimates are re-filtered through up to 8 origins between the first
  selection origin and n − h; with >= 5 origins the intervals are rescaled by per-level
  split-conformal factors (calibration.py; narrowed by at most 10 % below the 90 % level,
  never at 90 % and above). Short series fall back to origins starting at half the series,
  fitted there, and to the model's own intervals below 5 origins.
- The structure is settled on the whole series for ETS, Theta and STL: settled on the early
  part alone it forecast worse. Scoring it there instead of scoring the search also spares
  the refit a second search.

The figures behind these rules, and the rules tried and dropped, are in
tests/benchmarks/RESULTS.md.
"""

from __future__ import annotations

import time
from collections.abc import Sequence
from typing import Any

import pandas as pd

from service.core.checks import check_coverage, check_positive_int
from service.core.errors import RequestError
from service.core.evaluation import calibration as cal
from service.core.evaluation.backtest import MapFn, Task, run
from service.core.evaluation.origins import (
    MINIMUM_ORIGINS,
    calibration_plan,
    dense_plan,
    estimated_again_at,
)
from service.core.evaluation.records import ModelBacktest, RankEntry
from service.core.evaluation.scoring import check_metric
from service.core.models.base import (
    FitWarning,
    Specification,
    family_of,
)
from service.core.models.naive import NaiveSpec
from service.core.selection.averaging import combine
from service.core.selection.candidates import (
    CandidateSet,
    SeriesProfile,
    candidates_for,
    profile_series,
)
from service.core.selection.choice import SEVERAL_PERIODS_TRIM
from service.core.selection.delivered import delivered, model_periods, settle
from service.core.selection.guard import Guarded, benchmark_name, guard, no_skill_message
from service.core.selection.outcome import AutoForecast, Selection
from service.core.selection.screening import left_out, plausible_choice, screened
from service.core.selection.short_series import modelled_periods, plan_for, simple_candidates
from service.core.selection.skill import (
    benchmark_of,
    drift_pays,
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
    """Model "auto": fit and backtest the candidates, choose, guard, calibrate, forecast.

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
    longest = max(modelled_periods(chosen_set.specifications), default=0.0)
    cuts = plan_for(len(y), horizon, origins, profile, longest)
    if cuts.simple_only and candidates is None:
        chosen_set = simple_candidates()
    profile = cuts.profile
    specs = with_benchmarks(list(chosen_set.specifications), profile)
    extra = list(cuts.warnings)
    if len(y) < full_length:
        extra.append(
            FitWarning(
                "history_shortened",
                f"model auto estimated its candidates on the latest {len(y)} of the "
                f"{full_length} points: older points cost time and add little to the forecast",
            )
        )
    clock.lap("profile")
    if cuts.plan is None:
        return _unscored(y, horizon, levels, metric, chosen_set, profile, extra, clock)
    plan = cuts.plan

    periods = model_periods(specs, profile)
    # The estimates at the selection origins serve both the ranking and the calibration
    # (denser origins between the first and the last): only re-filtering is added.
    evaluation_plan = dense_plan(
        plan,
        calibration_plan(len(y), plan.horizon, profile.benchmark_period, first=plan.origins[0]),
    )
    # Each candidate is estimated again at the later selection origins: every window is then
    # forecast from the data before it, as the delivered forecast is from all the data (on
    # long series only where the new points are a noticeable share: estimated_again_at).
    dense = run(
        y,
        specs,
        profile.benchmark_period,
        evaluation_plan,
        levels,
        map_fn,
        periods,
        settle=settle,
        refit_at=estimated_again_at(plan),
    )
    # The ranking pools the scaled errors over every origin of the dense plan: more origins
    # for the same estimates, so one lucky window decides less.
    results = [screened(r, y) for r in dense]
    failed = left_out(dense)
    extra.extend([] if failed is None else [failed])
    clock.lap("backtest")

    several = len(modelled_periods(specs)) > 1
    picked = plausible_choice(
        results,
        specs,
        metric,
        candidates is None,
        evaluation_plan,
        (y, horizon, levels),
        trim=SEVERAL_PERIODS_TRIM if several else None,
    )
    bench_index = specs.index(benchmark_of(specs, profile))
    drifts = drift_pays(y) and any(
        r.ok and family_of(s) == "drift" for s, r in zip(specs, results, strict=True)
    )
    walk = guarded_benchmark(profile, drifts)
    walk_index = None
    if walk is not None:
        walk_index = next(
            (i for i, s in enumerate(specs) if family_of(s) == walk[0] and results[i].ok),
            next(i for i, s in enumerate(specs) if family_of(s) == "naive"),
        )
    guarded = guard(
        Guarded(picked.rule, picked.members, picked.weights),
        _merged(results, picked.members, picked.weights).score(metric),
        None if walk_index is None else (walk_index, results[walk_index].score(metric)),
        (bench_index, results[bench_index].score(metric)),
    )
    members, weights = list(guarded.members), guarded.weights
    delivered_bt = _merged(results, members, weights)
    skill_score = skill(delivered_bt.score(metric), results[bench_index].score(metric))
    if skill_score is not None and skill_score <= 0:
        bench = benchmark_name(results[bench_index].label)
        message = no_skill_message(guarded.rule, bench, skill_score, walk[1] if walk else "")
        extra.append(FitWarning("no_skill_over_naive", message))

    calibration = _calibrate(
        y,
        [results[i].resolved or specs[i] for i in members],
        weights,
        profile,
        delivered_bt,
        plan.horizon,
        levels,
        map_fn,
    )
    clock.lap("calibration")
    fitted = delivered(y, [results[i] for i in members], weights, [periods[i] for i in members])
    clock.lap("refit")
    forecast = cal.apply(fitted.forecast(horizon, levels), calibration)
    clock.lap("forecast")
    label = fitted.describe().label

    selection = Selection(
        metric=metric,
        rule=guarded.rule,
        chosen=label,
        ranking=_ranking(picked.ranking, delivered_bt, label, delivered_bt.score(metric)),
        benchmark=results[bench_index].label,
        skill_over_naive=skill_score,
        horizon=plan.horizon,
        step=plan.step,
        origins=tuple(y.index[o] for o in evaluation_plan.origins),
        calibration=calibration,
        candidates=chosen_set,
        profile=profile,
        failures=tuple((r.label, r.failure or "") for r in results if not r.ok),
        observations_used=len(y),
        candidate_seconds=tuple((r.label, r.fit_seconds, r.refilter_seconds) for r in dense),
    )
    warnings_out = tuple(extra) + tuple(fitted.warnings)
    return AutoForecast(fitted, forecast, selection, warnings_out, clock.laps)


def _ranking(
    ranking: tuple[RankEntry, ...], delivered_bt: ModelBacktest, label: str, score: float
) -> tuple[RankEntry, ...]:
    """The ranking with the delivered forecast under its delivered label (added when the
    guard made a forecast the choice had not ranked)."""
    kept = tuple(r for r in ranking if r.label not in (delivered_bt.label, label))
    entry = RankEntry(label, delivered_bt.specification, score)
    return tuple(sorted((*kept, entry), key=lambda r: r.score))


def _unscored(
    y: pd.Series,
    horizon: int,
    levels: tuple[float, ...],
    metric: str,
    candidates: CandidateSet,
    profile: SeriesProfile,
    notes: list[FitWarning],
    clock: _Clock,
) -> AutoForecast:
    """A series too short for any backtest: the naive forecast, nothing scored."""
    fitted = NaiveSpec().fit(y, 1)
    forecast = fitted.forecast(horizon, levels)
    clock.lap("forecast")
    label = fitted.describe().label
    selection = Selection(
        metric=metric,
        rule="too_short",
        chosen=label,
        ranking=(),
        benchmark=label,
        skill_over_naive=None,
        horizon=0,
        step=0,
        origins=(),
        calibration=None,
        candidates=candidates,
        profile=profile,
        observations_used=len(y),
    )
    return AutoForecast(fitted, forecast, selection, (*notes, *fitted.warnings), clock.laps)


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


def _merged(
    results: Sequence[ModelBacktest], members: Sequence[int], weights: Sequence[float] = ()
) -> ModelBacktest:
    """The backtest of the members' weighted combination (a lone member's own)."""
    chosen = [results[i] for i in members]
    return combine(chosen, weights=weights) if len(chosen) > 1 else chosen[0]


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
        return cal.calibrate(dense, index=y.index)
    longer = calibration_plan(len(y), horizon, profile.benchmark_period)
    if longer is None:
        return cal.calibrate(dense, index=y.index)
    results = run(
        y, specs, profile.benchmark_period, longer, levels, map_fn, model_periods(specs, profile)
    )
    if not all(r.ok for r in results):
        return cal.calibrate(dense, index=y.index)
    return cal.calibrate(_merged(results, range(len(results)), weights), index=y.index)


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
    estimation: str = "first_origin",
) -> Any:
    """POST /v1/backtests with specifications "auto": the candidates ``select`` would try."""
    from service.core.evaluation.backtest import backtest, check_estimation

    check_metric(metric)
    check_estimation(estimation)
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
        estimation=estimation,
    )
