"""The selection's decision rule: combination by default, a single model only on clear evidence."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from service.core.evaluation.records import ModelBacktest, OriginForecast, rank
from service.core.models.drift import DriftSpec
from service.core.models.ets.family import EtsSpec
from service.core.models.naive import NaiveSpec
from service.core.models.theta import ThetaSpec
from service.core.selection.choice import (
    MIN_WINDOWS,
    SEVERAL_PERIODS_TRIM,
    STACKING_SHARE,
    best_single,
    choose,
    disjoint_windows,
    score_weights,
    wins_majority,
)

ACTUAL = np.array([10.0, 11.0, 12.0])


def backtest(label: str, errors: list[float]) -> ModelBacktest:
    """A record whose forecast at origin k misses every step by errors[k] (scale 1)."""
    forecasts = tuple(
        OriginForecast(
            origin=pd.Timestamp("2020-01-01") + pd.Timedelta(days=k),
            actual=ACTUAL,
            point=ACTUAL + e,
            lower={0.8: ACTUAL + e - 1},
            upper={0.8: ACTUAL + e + 1},
            scale=1.0,
        )
        for k, e in enumerate(errors)
    )
    return ModelBacktest({"family": label}, label, forecasts, (0.8,), 0.0, 0.0)


SPECS = [NaiveSpec(), DriftSpec(), EtsSpec(), ThetaSpec()]


def decide(errors: dict[str, list[float]], windows: int, default_set: bool = True):  # type: ignore[no-untyped-def]
    results = [backtest(s.family, errors[s.family]) for s in SPECS]
    order = sorted(range(len(results)), key=lambda i: (results[i].score("mase"), i))
    return choose(results, SPECS, order, "mase", rank(results, "mase"), default_set, windows)


def test_the_combination_is_the_default_even_when_one_member_scores_a_little_better() -> None:
    picked = decide(
        {"naive": [3, 3, 3], "drift": [2, 2, 2], "ets": [1.0, 1.0, 1.0], "theta": [1.05, 1, 1]},
        windows=MIN_WINDOWS,
    )
    assert picked.rule == "combination"
    assert sorted(picked.members) == [2, 3]
    assert any(r.specification["family"] == "combination" for r in picked.ranking)


def test_members_are_weighted_by_their_backtest_score_and_the_stacked_weights() -> None:
    picked = decide(
        {"naive": [3, 3, 3], "drift": [2, 2, 2], "ets": [1.0, 1.0, 1.0], "theta": [2.0, 2, 2]},
        windows=MIN_WINDOWS - 1,
    )
    assert picked.rule == "combination"
    weights = dict(zip(picked.members, picked.weights, strict=True))
    # Scores 1 and 2 at the power 2 x 4/5 (four disjoint windows of the five that give the
    # full power): weights 1 and 2^-1.6, normalised; blended with the stacked weights, which
    # give ETS everything (both miss on the same side, ETS by less).
    low = 2.0**-1.6
    share = (1 - STACKING_SHARE) / (1 + low) + STACKING_SHARE
    np.testing.assert_allclose([weights[2], weights[3]], [share, 1 - share], rtol=1e-12)
    combined = next(r for r in picked.ranking if r.specification["family"] == "combination")
    # Both miss on the same side: the weighted mean of the two scores.
    assert combined.score == pytest.approx(share * 1 + (1 - share) * 2, rel=1e-12)


def test_score_weights_normalise_and_a_perfect_score_takes_all() -> None:
    np.testing.assert_allclose(score_weights([1.0, 2.0, 4.0]), [16 / 21, 4 / 21, 1 / 21])
    assert score_weights([0.0, 1.0]) == (1.0, 0.0)


def test_a_single_model_needs_a_clear_margin_a_majority_and_enough_windows() -> None:
    # Weighted 0.9 / 0.1, the combination still misses by 0.24 against ETS's 0.2.
    errors = {"naive": [3, 3, 3], "drift": [5, 5, 5], "ets": [0.2, 0.2, 0.2], "theta": [0.6] * 3}
    assert decide(errors, windows=MIN_WINDOWS).rule == "winner"
    assert decide(errors, windows=MIN_WINDOWS).members == (2,)
    # The same scores on too few disjoint windows are not evidence enough.
    assert decide(errors, windows=MIN_WINDOWS - 1).rule == "combination"
    # One huge win and two losses: lower mean error, but no majority of the origins.
    lucky = {"naive": [3, 3, 3], "drift": [5, 5, 5], "ets": [3, 1.2, 1.2], "theta": [0, 1.5, 1.5]}
    assert decide(lucky, windows=MIN_WINDOWS).rule == "combination"


def test_drift_is_never_chosen_from_the_default_set_but_may_be_when_requested() -> None:
    errors = {"naive": [3, 3, 3], "drift": [0.1, 0.1, 0.1], "ets": [2, 2, 2], "theta": [2, 2, 2]}
    picked = decide(errors, windows=MIN_WINDOWS)
    assert 1 not in picked.members
    assert decide(errors, windows=MIN_WINDOWS, default_set=False).members == (1,)
    mixed = next(r for r in picked.ranking if r.specification["family"] == "combination")
    assert {"family": "drift"} not in mixed.specification["members"]


def test_ties_go_to_the_simpler_model_and_majority_counts_origins() -> None:
    results = [backtest("ets", [1.0, 1.0]), backtest("naive", [1.005, 1.005])]
    specs = [EtsSpec(), NaiveSpec()]
    assert best_single(results, specs, [0, 1], "mase") == 1
    assert wins_majority(backtest("a", [0, 0, 5]), backtest("b", [1, 1, 1]))
    assert not wins_majority(backtest("a", [0, 5, 5]), backtest("b", [1, 1, 1]))


def test_disjoint_windows_count_the_non_overlapping_forecast_windows() -> None:
    assert disjoint_windows((10, 15, 20), 5) == 3
    assert disjoint_windows((10, 12, 14, 16, 18, 20), 5) == 2
    assert disjoint_windows((), 5) == 0


def test_weights_flatten_when_the_backtest_has_few_disjoint_windows() -> None:
    from service.core.selection.choice import MIN_WINDOWS, score_weights

    full = score_weights([1.0, 2.0], MIN_WINDOWS)
    assert full[0] == pytest.approx(0.8)  # 1 : 1/4 at the full power of 2
    one = score_weights([1.0, 2.0], 1)
    assert 0.5 < one[0] < full[0]
    assert one[0] == pytest.approx(1 / (1 + 2 ** -(2 / MIN_WINDOWS)))


def test_a_trimmed_combination_leaves_out_members_far_behind_the_best() -> None:
    # Several seasonal periods: theta at 1.3 x the best member's score leaves the combination.
    results = [
        backtest(s.family, e)
        for s, e in zip(SPECS, ([3, 3, 3], [2, 2, 2], [1, 1, 1], [1.3, 1.3, 1.3]), strict=True)
    ]
    order = sorted(range(len(results)), key=lambda i: (results[i].score("mase"), i))
    args = (results, SPECS, order, "mase", rank(results, "mase"), True, 3)
    assert sorted(choose(*args).members) == [2, 3]
    trimmed = choose(*args, trim=SEVERAL_PERIODS_TRIM)
    assert trimmed.members == (2,) and trimmed.rule == "winner"
    assert sorted(choose(*args, trim=1.35).members) == [2, 3]
