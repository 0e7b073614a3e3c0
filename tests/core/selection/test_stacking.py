"""Stacked weights: the simplex weights that minimise the combination's pooled scaled error."""

from __future__ import annotations

import itertools

import numpy as np
import pandas as pd
import pytest

from service.core.evaluation.records import ModelBacktest, OriginForecast
from service.core.selection.stacking import MAX_ROWS, stacked_weights, stacking_rows

ACTUAL = np.array([10.0, 11.0, 12.0])


def backtest(errors: list[np.ndarray], scales: list[float] | None = None) -> ModelBacktest:
    """A record whose forecast at origin k misses ACTUAL by errors[k] (per step)."""
    scales = scales or [1.0] * len(errors)
    forecasts = tuple(
        OriginForecast(
            origin=pd.Timestamp("2020-01-01") + pd.Timedelta(days=k),
            actual=ACTUAL,
            point=ACTUAL + np.asarray(e, dtype=float),
            lower={0.8: ACTUAL - 1},
            upper={0.8: ACTUAL + 1},
            scale=s,
        )
        for k, (e, s) in enumerate(zip(errors, scales, strict=True))
    )
    return ModelBacktest({"family": "x"}, "x", forecasts, (0.8,), 0.0, 0.0)


def loss(members: list[ModelBacktest], w: np.ndarray) -> float:
    """The pooled scaled absolute error of the combination with weights ``w``, directly."""
    total = 0.0
    for k, f in enumerate(members[0].forecasts):
        point = sum(wi * m.forecasts[k].point for wi, m in zip(w, members, strict=True))
        total += float(np.abs(point - f.actual).sum() / f.scale)
    return total


def test_members_missing_on_opposite_sides_cancel_out() -> None:
    # Misses of +1 and -3 at every step: 3/4 and 1/4 forecast exactly.
    a = backtest([np.full(3, 1.0)] * 3)
    b = backtest([np.full(3, -3.0)] * 3)
    w = stacked_weights([a, b])
    assert w is not None
    np.testing.assert_allclose(w, [0.75, 0.25], atol=1e-9)
    assert loss([a, b], np.asarray(w)) == pytest.approx(0.0, abs=1e-9)


def test_members_missing_on_the_same_side_leave_everything_to_the_closer_one() -> None:
    a = backtest([np.full(3, 1.0)] * 3)
    b = backtest([np.full(3, 2.0)] * 3)
    assert stacked_weights([a, b]) == pytest.approx((1.0, 0.0), abs=1e-9)


def test_each_origin_counts_in_units_of_its_own_scale() -> None:
    # Unscaled, B's single miss of 1 beats A's miss of 5; scaled (1 and 10), A's 0.5 beats B's 1.
    a = backtest([np.zeros(3), np.full(3, 5.0)], scales=[1.0, 10.0])
    b = backtest([np.ones(3), np.zeros(3)], scales=[1.0, 10.0])
    assert stacked_weights([a, b]) == pytest.approx((1.0, 0.0), abs=1e-9)


def test_the_linear_program_matches_a_search_over_a_grid_of_weights() -> None:
    # Reference: the loss computed directly at every weight on a 1/50 grid of the simplex; the
    # solver's weights must do at least as well as the best grid point.
    rng = np.random.default_rng(7)
    members = [
        backtest([rng.normal(bias, 1.0, 3) for _ in range(6)], scales=list(rng.uniform(1, 3, 6)))
        for bias in (-1.0, 0.5, 2.0)
    ]
    w = stacked_weights(members)
    assert w is not None and min(w) >= 0 and sum(w) == pytest.approx(1.0)
    grid = [
        np.array([i, j, 50 - i - j]) / 50
        for i, j in itertools.product(range(51), range(51))
        if i + j <= 50
    ]
    best = min(loss(members, g) for g in grid)
    assert loss(members, np.asarray(w)) <= best + 1e-9


def test_rows_without_an_actual_value_a_scale_or_a_finite_point_are_left_out() -> None:
    a = backtest([np.array([1.0, np.nan, 1.0]), np.ones(3)], scales=[1.0, 0.0])
    b = backtest([np.array([-1.0, -1.0, np.inf]), np.ones(3)], scales=[1.0, 0.0])
    x, t = stacking_rows([a, b])
    # Origin 0 keeps its first step only; origin 1 has no usable scale.
    np.testing.assert_allclose(x, [[11.0, 9.0]])
    np.testing.assert_allclose(t, [10.0])
    nothing = backtest([np.ones(3)], scales=[float("nan")])
    assert stacked_weights([nothing, nothing]) is None


def test_a_long_backtest_is_thinned_to_the_row_limit_and_still_finds_the_weights() -> None:
    # 400 origins of 3 steps (1,200 rows) missing by +1 and -1: thinned, still half and half.
    a = backtest([np.ones(3)] * 400)
    b = backtest([-np.ones(3)] * 400)
    assert stacking_rows([a, b])[1].size > MAX_ROWS
    assert stacked_weights([a, b]) == pytest.approx((0.5, 0.5), abs=1e-9)
