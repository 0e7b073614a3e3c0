"""Automatic selection: determinism, the naive guard, seasonal series, calibration, errors."""

from __future__ import annotations

import itertools
import json
from typing import Any

import numpy as np
import pandas as pd
import pytest

from service.api.render import backtest_body, selection_body
from service.core.errors import RequestError
from service.core.evaluation.origins import calibration_plan, estimated_again_at, selection_plan
from service.core.models.drift import DriftSpec
from service.core.models.naive import NaiveSpec
from service.core.models.seasonal_naive import SeasonalNaiveSpec
from service.core.selection.auto import backtest_auto, select
from service.core.selection.outcome import AutoForecast


def monthly(values: np.ndarray) -> pd.Series:
    return pd.Series(values, index=pd.date_range("2005-01-01", periods=values.size, freq="MS"))


def seasonal_series(n: int = 72, seed: int = 4) -> pd.Series:
    rng = np.random.default_rng(seed)
    t = np.arange(n)
    return monthly(50 + 0.1 * t + 8 * np.sin(2 * np.pi * t / 12) + rng.normal(size=n))


@pytest.fixture(scope="module")
def seasonal_result() -> AutoForecast:
    return select(seasonal_series(), 12, 12, coverage=(0.95, 0.8))


def test_selection_is_deterministic(seasonal_result: AutoForecast) -> None:
    again = select(seasonal_series(), 12, 12, coverage=(0.95, 0.8))
    assert selection_body(again.selection) == selection_body(seasonal_result.selection)
    np.testing.assert_array_equal(again.forecast.point, seasonal_result.forecast.point)


def test_random_walk_gets_the_naive_forecast_and_the_warning() -> None:
    from service.core.diagnostics.report import diagnose

    rng = np.random.default_rng(100)
    y = monthly(100 + rng.normal(size=120).cumsum())
    result = select(y, 12, 12, diagnostics=diagnose(y, 12))
    assert result.selection.profile.random_walk
    assert result.selection.rule == "naive_guard"
    assert result.fitted.describe().family == "naive"
    codes = [w.code for w in result.warnings]
    assert "no_skill_over_naive" in codes
    message = next(w.message for w in result.warnings if w.code == "no_skill_over_naive")
    assert "does not mean a useful model" in message
    np.testing.assert_allclose(result.forecast.point, y.iloc[-1])


def business_days(values: np.ndarray) -> pd.Series:
    return pd.Series(values, index=pd.date_range("2020-01-06", periods=values.size, freq="B"))


def test_random_walk_with_a_steady_step_gets_the_drift_forecast() -> None:
    from service.core.diagnostics.report import diagnose

    rng = np.random.default_rng(3)
    y = business_days(100 + (0.25 + rng.normal(size=200)).cumsum())
    result = select(y, 1, 10, diagnostics=diagnose(y, 1))
    assert result.selection.profile.random_walk
    assert result.selection.rule == "naive_guard"
    assert result.fitted.describe().family == "drift"
    step = float(np.diff(y.to_numpy()).mean())
    np.testing.assert_allclose(result.forecast.point, y.iloc[-1] + step * np.arange(1, 11))


def test_a_trend_with_structure_keeps_its_model_though_its_steps_drift() -> None:
    from service.core.diagnostics.report import diagnose

    rng = np.random.default_rng(5)
    noise = np.zeros(200)
    for t in range(1, 200):
        noise[t] = 0.5 * noise[t - 1] + rng.normal()
    y = business_days(100 + 0.25 * np.arange(200) + noise)
    result = select(y, 1, 10, diagnostics=diagnose(y, 1))
    assert not result.selection.profile.random_walk
    assert result.selection.rule != "naive_guard"
    assert result.fitted.describe().family not in ("naive", "drift")


def test_seasonal_random_walk_gets_the_seasonal_naive_guard() -> None:
    from service.core.diagnostics.report import diagnose

    rng = np.random.default_rng(7)
    y = monthly(100 + np.cumsum(rng.normal(size=(10, 12)), axis=0).ravel())
    report = diagnose(y, 12)
    assert report.random_walk.is_seasonal_random_walk  # type: ignore[union-attr]
    result = select(y, 12, 12, diagnostics=report)
    assert result.selection.profile.seasonal_random_walk
    assert not result.selection.profile.random_walk
    assert result.selection.rule == "naive_guard"
    assert result.fitted.describe().family == "seasonal_naive"
    np.testing.assert_allclose(result.forecast.point, y.iloc[-12:].to_numpy())
    message = next(w.message for w in result.warnings if w.code == "no_skill_over_naive")
    assert "seasonal naive" in message


def test_seasonal_series_gets_a_seasonal_model(seasonal_result: AutoForecast) -> None:
    result = seasonal_result
    assert result.selection.profile.seasonal
    pattern = 8 * np.sin(2 * np.pi * np.arange(72, 84) / 12)
    assert np.corrcoef(result.forecast.point, pattern)[0, 1] > 0.9
    assert result.selection.skill_over_naive is not None


def test_selection_reports_ranking_skill_and_calibration(seasonal_result: AutoForecast) -> None:
    result = seasonal_result
    sel = result.selection
    data = json.loads(json.dumps(selection_body(sel), allow_nan=False))
    assert data["metric"] == "mase" and data["ranking"]
    scores = [r["score"] for r in data["ranking"]]
    assert scores == sorted(scores)
    chosen_score = next(r.score for r in sel.ranking if r.label == sel.chosen)
    bench_score = next(r.score for r in sel.ranking if r.label == sel.benchmark)
    assert sel.skill_over_naive == pytest.approx(1 - chosen_score / bench_score)
    assert sel.calibration is not None
    assert [lv.coverage for lv in sel.calibration.levels] == [0.8, 0.95]
    labels = [r["label"] for r in data["ranking"]]
    assert sel.chosen in labels
    if sel.rule == "combination":
        # Every non-benchmark candidate is a member; drift and the naive forecasts never are.
        chosen = next(r for r in sel.ranking if r.label == sel.chosen)
        families = {m["family"] for m in chosen.specification["members"]}
        assert not families & {"drift", "naive", "seasonal_naive"}
    lower, upper = result.forecast.intervals[1].lower, result.forecast.intervals[1].upper
    assert np.all(lower <= result.forecast.point) and np.all(result.forecast.point <= upper)


BENCHMARKS = (NaiveSpec(), SeasonalNaiveSpec(), DriftSpec())


def test_selection_by_another_metric_among_given_candidates() -> None:
    result = select(seasonal_series(), 12, 6, metric="smape", candidates=BENCHMARKS)
    assert result.selection.metric == "smape"
    assert result.fitted.describe().family in {"seasonal_naive", "combination"}
    with pytest.raises(RequestError):
        select(seasonal_series(), 12, 6, metric="accuracy")


def test_ten_points_are_forecast_by_the_simple_families_with_a_warning() -> None:
    result = select(monthly(np.arange(10.0)), 1, 6)
    codes = [w.code for w in result.warnings]
    assert "simple_families_only" in codes
    assert result.forecast.point.size == 6
    assert result.selection.chosen == result.fitted.describe().label


def test_short_series_is_compared_at_a_shorter_horizon_with_a_warning() -> None:
    rng = np.random.default_rng(8)
    y = monthly(20 + 0.5 * np.arange(16.0) + rng.normal(size=16))
    result = select(y, 1, 12, candidates=BENCHMARKS[::2])
    assert result.selection.horizon == 6
    assert "backtest_horizon_shortened" in [w.code for w in result.warnings]
    assert result.forecast.point.size == 12


def test_plans_shrink_the_step_before_the_origins() -> None:
    plan = selection_plan(40, horizon=6, origins=3, seasonal_period=1)
    assert plan is not None and plan.step == 6 and plan.origins[-1] == 34
    tight = selection_plan(24, horizon=6, origins=3, seasonal_period=1)
    assert tight is not None and tight.step == 4 and len(tight.origins) == 3
    assert calibration_plan(30, 6, 1) is not None
    assert calibration_plan(16, 6, 1) is None
    dense = calibration_plan(40, 6, 1, first=22)
    assert dense is not None and dense.origins[0] >= 22 and dense.origins[-1] == 34


def test_map_fn_fans_out_the_candidates() -> None:
    calls: list[int] = []

    def counting_map(fn, tasks):  # type: ignore[no-untyped-def]
        calls.append(len(tasks))
        return list(map(fn, tasks))

    select(seasonal_series(), 12, 6, candidates=BENCHMARKS, map_fn=counting_map)
    assert calls == [3]


def test_backtest_auto_ranks_the_candidates() -> None:
    report = backtest_auto(seasonal_series(), 12, horizon=6, origins=3, step=2)
    assert report.ranking and {m.label for m in report.models} >= {"naive"}
    json.dumps(backtest_body(report, []), allow_nan=False)


def test_combination_averages_points_and_bounds() -> None:
    from service.core.evaluation.backtest import backtest
    from service.core.models.combination import CombinationSpec
    from service.core.selection.averaging import combine

    y = seasonal_series()
    report = backtest(y, list(BENCHMARKS), 12, horizon=4, origins=2, step=2, coverage=(0.8,))
    mixed = combine(report.models)
    first = [m.forecasts[0] for m in report.models]
    np.testing.assert_allclose(mixed.forecasts[0].point, np.mean([f.point for f in first], 0))
    np.testing.assert_allclose(
        mixed.forecasts[0].upper[0.8], np.mean([f.upper[0.8] for f in first], 0)
    )
    fitted = CombinationSpec(members=tuple(BENCHMARKS)).fit(y, 12)
    forecast = fitted.forecast(3, (0.8,))
    parts = [s.fit(y, 12).forecast(3, (0.8,)).point for s in BENCHMARKS]
    np.testing.assert_allclose(forecast.point, np.mean(parts, axis=0))
    assert fitted.describe().family == "combination"


def test_weighted_combination_of_backtests_and_of_fitted_models() -> None:
    from service.core.evaluation.backtest import backtest
    from service.core.models.combination import CombinationSpec
    from service.core.selection.averaging import combine

    y = seasonal_series()
    report = backtest(y, list(BENCHMARKS), 12, horizon=4, origins=2, step=2, coverage=(0.8,))
    weights = [3.0, 1.0] + [0.0] * (len(BENCHMARKS) - 2)
    mixed = combine(report.models, weights=weights)
    first = [m.forecasts[0] for m in report.models]
    np.testing.assert_allclose(
        mixed.forecasts[0].point, 0.75 * first[0].point + 0.25 * first[1].point
    )
    assert mixed.specification["weights"][:2] == [0.75, 0.25]
    fitted = CombinationSpec(members=tuple(BENCHMARKS), weights=tuple(weights)).fit(y, 12)
    parts = [s.fit(y, 12).forecast(3, (0.8,)) for s in BENCHMARKS[:2]]
    forecast = fitted.forecast(3, (0.8,))
    np.testing.assert_allclose(forecast.point, 0.75 * parts[0].point + 0.25 * parts[1].point)
    np.testing.assert_allclose(
        forecast.intervals[0].lower,
        0.75 * parts[0].intervals[0].lower + 0.25 * parts[1].intervals[0].lower,
    )
    assert fitted.describe().parameters["weight[0]"] == 0.75
    assert fitted.refilter(y).forecast(3, (0.8,)).point == pytest.approx(forecast.point)


def test_auto_weights_members_by_their_backtest_scores(seasonal_result: AutoForecast) -> None:
    selection = seasonal_result.selection
    assert selection.rule == "combination"
    parameters = seasonal_result.fitted.describe().parameters
    weights = [v for k, v in parameters.items() if k.startswith("weight[")]
    assert sum(weights) == pytest.approx(1.0) and len(weights) >= 2
    # Members are listed best first, so their weights never increase.
    assert all(a >= b for a, b in itertools.pairwise(weights))


def test_transformed_candidates_keep_their_roles_and_resolved_orders() -> None:
    from service.core.evaluation.backtest import resolved_specification
    from service.core.models.arima.family import ArimaSpec
    from service.core.models.ets.family import EtsSpec
    from service.core.models.transforms import Transform, TransformedSpec

    y = seasonal_series() + 50.0
    logged = [
        TransformedSpec(spec, Transform("log"))
        for spec in (NaiveSpec(), SeasonalNaiveSpec(), DriftSpec(), EtsSpec(), ArimaSpec())
    ]
    result = select(y, 12, 6, candidates=logged)
    labels = result.fitted.describe().residual_diagnostics.members or ()
    # Benchmarks on the log scale are still benchmarks: never members of the combination.
    assert result.selection.rule == "combination"
    assert not any(label.startswith(("naive", "seasonal naive", "drift")) for label in labels)
    assert result.selection.benchmark.startswith("seasonal naive")
    fitted = TransformedSpec(ArimaSpec(search="quick"), Transform("log")).fit(y, 12)
    resolved = resolved_specification(fitted)
    assert resolved.transform.kind == "log" and resolved.base.order is not None


def test_long_weekly_season_goes_to_stl_through_the_diagnostics() -> None:
    from service.core.diagnostics.report import diagnose

    rng = np.random.default_rng(3)
    t = np.arange(260)
    values = 100 + 10 * np.sin(2 * np.pi * t / 52) + rng.normal(size=260) * 2
    y = pd.Series(values, index=pd.date_range("2015-01-05", periods=260, freq="W-MON"))
    result = select(y, 52, 13, diagnostics=diagnose(y, 52))
    assert result.selection.profile.seasonal and result.selection.profile.long_period
    families = {r.specification["family"] for r in result.selection.ranking}
    assert "stl" in families
    pattern = 10 * np.sin(2 * np.pi * np.arange(260, 273) / 52)
    assert np.corrcoef(result.forecast.point, pattern)[0, 1] > 0.8


def test_intermittent_demand_is_compared_with_croston() -> None:
    rng = np.random.default_rng(12)
    demand = np.where(rng.random(120) < 0.4, rng.integers(1, 9, 120), 0).astype(float)
    result = select(monthly(demand), 12, 6)
    assert result.selection.profile.intermittent
    labels = {r.label for r in result.selection.ranking}
    assert {"Croston's method", "Croston's method, Syntetos-Boylan correction"} <= labels
    assert np.all(result.forecast.point >= 0)


def test_sales_that_start_after_a_run_of_zeros_get_finite_intervals() -> None:
    # A product launched late: naive's intervals have zero width over the zeros and miss at
    # every backtest origin there; the calibration factor stops at its bound (it was inf).
    rng = np.random.default_rng(0)
    values = np.r_[np.zeros(40), 5 + rng.normal(size=9)]
    y = pd.Series(values, index=pd.date_range("1950", periods=49, freq="YS"))
    result = select(y, 1, 12)
    for interval in result.forecast.intervals:
        assert np.all(np.isfinite(interval.lower)) and np.all(np.isfinite(interval.upper))
    assert all(np.isfinite(level.factor) for level in result.selection.calibration.levels)


def test_a_trending_series_gets_the_combination_without_drift() -> None:
    rng = np.random.default_rng(21)
    y = monthly(20 + 0.4 * np.arange(60.0) + rng.normal(size=60))
    result = select(y, 1, 6)
    sel = result.selection
    assert sel.rule == "combination"
    chosen = next(r for r in sel.ranking if r.label == sel.chosen)
    assert "drift" in {r.label for r in sel.ranking}
    assert {"family": "drift"} not in chosen.specification["members"]
    assert result.fitted.describe().family == "combination"
    # ETS and the SES/Holt/damped average, re-searched on the full series, averaged.
    members = json.dumps(chosen.specification["members"])
    assert sel.chosen.startswith("weighted combination of") and members.count('"ets"') >= 4
    slope = np.polyfit(np.arange(6), result.forecast.point, 1)[0]
    assert 0.1 < slope < 0.8


def test_long_series_are_estimated_on_their_latest_points_with_a_warning(
    monkeypatch: pytest.MonkeyPatch,
) -> None:
    from service.core.selection import auto as selection

    monkeypatch.setattr(selection, "MAX_HISTORY", 60)
    y = seasonal_series(n=90)
    result = select(y, 12, 6)
    assert result.selection.observations_used == 60
    assert "history_shortened" in {w.code for w in result.warnings}
    assert result.forecast.index[0] == y.index[-1] + y.index.freq
    # Four seasons are always kept, whatever the cap.
    assert len(selection.recent_history(y, 24)) == 90
    assert len(selection.recent_history(y.iloc[:50], 12)) == 50


def test_candidates_are_estimated_again_before_each_selection_origin(
    monkeypatch: pytest.MonkeyPatch,
) -> None:
    from service.core.selection import auto as selection

    asked: list[tuple[int, ...]] = []
    real = selection.run

    def spy(*args: Any, **kwargs: Any) -> Any:
        asked.append(tuple(kwargs.get("refit_at", ())))
        return real(*args, **kwargs)

    monkeypatch.setattr(selection, "run", spy)
    select(seasonal_series(), 12, 12)
    plan = selection_plan(72, 12, 3, 12)
    assert plan is not None and plan.origins == (36, 48, 60)
    assert asked[0] == estimated_again_at(plan) == (48, 60)


def test_three_weeks_of_hourly_data_score_the_several_period_models() -> None:
    # Two full weekly cycles must lie before the first origin, or MSTL and harmonic
    # regression fail there and never reach the choice.
    from service.core.diagnostics.report import diagnose
    from tests.multi_period_series import hourly_counts

    y = hourly_counts(weeks=3)[:-24]
    periods = (24.0, 168.0)
    chosen = select(y, 24, 48, diagnostics=diagnose(y, 24, periods=periods))
    first = chosen.selection.origins[0]
    assert y.index.get_loc(first) >= 2 * 168 + 2
    assert not [why for _, why in chosen.selection.failures if "full cycles" in why]
    assert any(r.label.startswith(("MSTL", "harmonic")) for r in chosen.selection.ranking)
