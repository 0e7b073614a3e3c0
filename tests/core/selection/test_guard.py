"""Auto's honesty: the benchmark guard, the no-skill warning, short series answered, the
report describing the delivered forecast, and the one-sentence summary."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from service.core.diagnostics.report import diagnose
from service.core.selection.auto import AutoForecast, select
from service.core.selection.candidates import SeriesProfile
from service.core.selection.guard import (
    BENCHMARK_GUARD,
    RANDOM_WALK_GUARD,
    Guarded,
    guard,
    no_skill_message,
)
from service.core.selection.skill import drift_pays, guarded_benchmark, skill
from service.core.selection.summary import auto_summary, explicit_summary


def series(values: np.ndarray, freq: str = "MS", start: str = "2010-01-01") -> pd.Series:
    return pd.Series(values, index=pd.date_range(start, periods=values.size, freq=freq))


def test_skill_is_one_minus_the_score_ratio_and_none_without_a_benchmark_score() -> None:
    assert skill(0.8, 1.0) == pytest.approx(0.2)
    assert skill(1.2, 1.0) == pytest.approx(-0.2)
    assert skill(1.0, 0.0) is None and skill(float("inf"), 1.0) is None


def test_a_forecast_below_the_benchmark_gets_the_benchmark_mixed_in_by_score() -> None:
    chosen = Guarded("combination", (2, 3), (0.75, 0.25))
    out = guard(chosen, 1.2, walk=None, benchmark=(1, 1.0))
    assert out.rule == BENCHMARK_GUARD and out.members == (2, 3, 1)
    # Inverse-square weights of 1.2 and 1.0: the benchmark takes 1/(1 + 1/1.44).
    share = 1.0 / (1.0 + 1.0 / 1.44)
    assert out.weights[-1] == pytest.approx(share)
    assert sum(out.weights) == pytest.approx(1.0)
    assert out.weights[0] / out.weights[1] == pytest.approx(3.0)
    kept = guard(chosen, 0.9, walk=None, benchmark=(1, 1.0))
    assert kept == chosen


def test_a_random_walk_without_5_percent_over_naive_gets_the_naive_forecast() -> None:
    chosen = Guarded("winner", (4,), ())
    out = guard(chosen, 0.97, walk=(0, 1.0), benchmark=(0, 1.0))
    assert out == Guarded(RANDOM_WALK_GUARD, (0,), ())


def test_the_average_step_pays_from_a_squared_t_ratio_above_two() -> None:
    # 100 steps of sd 1 (alternating 1 +- 1 around the mean): t² = 100 mean² / sd².
    wiggle = np.tile([-1.0, 1.0], 50)
    for mean, pays in ((0.15, True), (0.13, False), (-0.15, True), (0.0, False)):
        steps = mean + wiggle * np.sqrt(99 / 100)
        assert drift_pays(series(np.concatenate([[0.0], steps.cumsum()]))) is pays
    assert not drift_pays(series(np.arange(10.0)))  # equal steps: no spread, no walk
    assert not drift_pays(series(np.array([1.0, 2.0, 4.0])))  # two steps only


def test_the_guard_falls_back_to_drift_only_for_a_random_walk_whose_step_pays() -> None:
    walk = SeriesProfile(200, 1, False, True, 0.0, random_walk=True)
    assert guarded_benchmark(walk)[0] == "naive"
    family, message = guarded_benchmark(walk, drifts=True)
    assert family == "drift" and "average step" in message
    seasonal = SeriesProfile(200, 12, True, True, 0.0, False, seasonal_random_walk=True)
    assert guarded_benchmark(seasonal, drifts=True)[0] == "seasonal_naive"
    assert guarded_benchmark(SeriesProfile(200, 1, False, True, 0.0, False), drifts=True) is None


def test_the_summary_names_the_drift_forecast_the_guard_delivered() -> None:
    from types import SimpleNamespace

    walk = SimpleNamespace(intermittent=False, random_walk=True, seasonal=False)
    for chosen, leans in (("drift", "leans on drift"), ("naive", "leans on naive")):
        selection = SimpleNamespace(
            benchmark="naive",
            skill_over_naive=-0.03,
            rule=RANDOM_WALK_GUARD,
            chosen=chosen,
            profile=walk,
            calibration=None,
        )
        assert leans in auto_summary(selection)


def test_the_summary_says_a_delivered_drift_forecast_carries_the_average_step() -> None:
    from types import SimpleNamespace

    walk = SimpleNamespace(intermittent=False, random_walk=True, seasonal=False)
    for chosen, said in (("drift", "last value plus that step"), ("naive", "its last value")):
        selection = SimpleNamespace(
            benchmark="naive",
            skill_over_naive=0.08,
            rule=RANDOM_WALK_GUARD,
            chosen=chosen,
            profile=walk,
            calibration=None,
        )
        text = auto_summary(selection)
        assert said in text and "beat naive by 8 %" in text
    assert "steady average step" not in auto_summary(
        SimpleNamespace(**{**vars(selection), "chosen": "naive"})
    )


def test_the_drift_guard_warning_says_naive_was_mixed_in_and_how_much_worse_it_did() -> None:
    walk = "The series behaves like a random walk with a steady average step."
    text = no_skill_message(RANDOM_WALK_GUARD, "naive", -0.044, walk)
    assert text.startswith(walk) and "naive forecast is mixed in" in text
    assert "4 % worse than the naive forecast alone" in text and text.endswith(".")


def test_a_drift_forecast_that_lost_to_naive_faces_the_benchmark_guard() -> None:
    # Candidate 0 chosen, 1 the drift forecast, 2 naive (the benchmark): the chosen forecast
    # is not 5 % better than drift, drift did worse than naive, so naive joins drift.
    mixed = guard(Guarded("combination", (0,), ()), 1.0, (1, 1.02), (2, 0.98))
    assert mixed.rule == RANDOM_WALK_GUARD and mixed.members == (1, 2)
    assert sum(mixed.weights) == pytest.approx(1.0) and mixed.weights[1] > mixed.weights[0]
    # Drift no worse than naive: it stays alone.
    alone = guard(Guarded("combination", (0,), ()), 1.0, (1, 0.97), (2, 0.98))
    assert alone == Guarded(RANDOM_WALK_GUARD, (1,))


def test_a_walk_forecast_that_lost_to_seasonal_naive_gets_it_mixed_in_and_says_so() -> None:
    # A random walk on a seasonal series: the guard's naive forecast (1) lost to the seasonal
    # naive benchmark (2), which joins it; the warning names the benchmark, not drift.
    mixed = guard(Guarded("combination", (0,), ()), 1.0, (1, 1.01), (2, 0.9))
    assert mixed.rule == RANDOM_WALK_GUARD and mixed.members == (1, 2)
    text = no_skill_message(RANDOM_WALK_GUARD, "seasonal naive", -0.05, "A random walk.")
    assert "seasonal naive forecast is mixed in" in text and "drift" not in text


def test_a_walk_with_a_weak_drift_gets_naive_mixed_in_when_drift_lost_to_it() -> None:
    # Seeded walk, mean step 0.37 (sd 2.7, t² 2.8): the guard carries the step; in this
    # backtest drift did worse than naive, so naive is mixed in, and a warning says so when the
    # mixture still lost to naive.
    rng = np.random.default_rng(39)
    y = series(500 + np.concatenate([[0.0], np.cumsum(rng.normal(0.25, 3.0, 149))]))
    result = select(y, 12, 12, diagnostics=diagnose(y, 12))
    assert result.selection.rule == RANDOM_WALK_GUARD
    assert result.fitted.describe().residual_diagnostics.members == ("drift", "naive")
    assert result.selection.chosen.startswith("weighted combination")
    value = result.selection.skill_over_naive
    if value is not None and value < 0:
        message = next(w.message for w in result.warnings if w.code == "no_skill_over_naive")
        assert "naive forecast is mixed in" in message


def test_messages_are_plain_sentences_naming_the_benchmark() -> None:
    text = no_skill_message(BENCHMARK_GUARD, "seasonal naive", -0.12, "")
    assert "seasonal naive" in text and "12 %" in text and text.endswith(".")
    walk = "The series behaves like a random walk."
    assert no_skill_message(RANDOM_WALK_GUARD, "naive", 0.0, walk) == walk


@pytest.fixture(scope="module")
def batch() -> list[AutoForecast]:
    """Seeded monthly series of every kind a batch brings: noise, walks, trends, seasons."""
    out = []
    for seed in range(8):
        rng = np.random.default_rng(seed)
        t = np.arange(60)
        kind = seed % 4
        noise = rng.normal(0, 1 + seed, t.size)
        if kind == 0:
            values = 100 + noise
        elif kind == 1:
            values = 100 + np.cumsum(noise)
        elif kind == 2:
            values = 100 + 0.8 * t + 3 * noise
        else:
            values = 100 + 10 * np.sin(2 * np.pi * t / 12) + noise
        out.append(select(series(values), 12, 12))
    return out


def test_never_a_negative_skill_without_the_warning(batch: list[AutoForecast]) -> None:
    for result in batch:
        value = result.selection.skill_over_naive
        codes = [w.code for w in result.warnings]
        if value is not None and value <= 0:
            assert "no_skill_over_naive" in codes, result.selection.chosen
        else:
            assert "no_skill_over_naive" not in codes


def test_the_report_describes_the_delivered_forecast(batch: list[AutoForecast]) -> None:
    for result in batch:
        label = result.fitted.describe().label
        assert result.selection.chosen == label
        assert label in [r.label for r in result.selection.ranking]
        entry = next(r for r in result.selection.ranking if r.label == label)
        benchmark = next(
            r for r in result.selection.ranking if r.label == result.selection.benchmark
        )
        assert result.selection.skill_over_naive == pytest.approx(1 - entry.score / benchmark.score)


def test_every_auto_forecast_has_a_one_sentence_summary(batch: list[AutoForecast]) -> None:
    for result in batch:
        text = auto_summary(result.selection)
        assert text.endswith(".") and text.count(".") == 1
        assert "naive" in text and "intervals covered" in text
    assert explicit_summary("ETS(A,N,N)").startswith("ETS(A,N,N) fitted as requested")


def test_six_points_are_forecast_with_a_warning_saying_what_was_cut() -> None:
    y = series(np.array([12.0, 15.0, 14.0, 18.0, 17.0, 21.0]))
    result = select(y, 12, 3)
    assert result.forecast.point.size == 3
    assert "simple_families_only" in [w.code for w in result.warnings]
    assert result.selection.chosen == result.fitted.describe().label


def test_three_points_get_the_naive_forecast_without_a_backtest() -> None:
    result = select(series(np.array([5.0, 7.0, 6.0])), 1, 2)
    assert result.fitted.describe().label == "naive" and result.selection.rule == "too_short"
    assert "no_backtest" in [w.code for w in result.warnings]
    assert "could not be measured" in auto_summary(result.selection)


def test_three_years_of_weekly_points_are_compared_on_two_seasons() -> None:
    rng = np.random.default_rng(3)
    t = np.arange(156)
    values = 100 + 10 * np.sin(2 * np.pi * t / 52) + rng.normal(0, 2, t.size)
    y = series(values, "W-SUN", "2020-01-05")
    result = select(y, 52, 13, diagnostics=diagnose(y, 52))
    assert result.selection.profile.seasonal and result.forecast.point.size == 13
    assert "backtest_shortened" in [w.code for w in result.warnings]


def test_candidates_that_cannot_be_fitted_are_named_in_a_warning() -> None:
    # Gaps kept (missing policy 'keep'): the families that need a complete series fail; the
    # forecast comes from the rest, and the caller is told which were left out and why.
    rng = np.random.default_rng(14)
    t = np.arange(96)
    values = 100 + 15 * np.sin(2 * np.pi * t / 12) + rng.normal(0, 2, t.size)
    values[[20, 41, 70]] = np.nan
    y = series(values)
    result = select(y, 12, 6, diagnostics=diagnose(y, 12))
    warning = next(w for w in result.warnings if w.code == "failed_candidate")
    assert "ets" in warning.message and "needs a complete series" in warning.message
    assert "FitError" not in warning.message
    failed = [label for label, _ in result.selection.failures]
    assert f"left out {len(failed)} of the" in warning.message


def test_no_left_out_warning_when_every_candidate_fits(batch: list[AutoForecast]) -> None:
    for result in batch:
        if not result.selection.failures:
            assert "failed_candidate" not in [w.code for w in result.warnings]
