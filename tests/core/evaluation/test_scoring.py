"""Accuracy measures: hand-computed values, missing actuals and edge cases."""

from __future__ import annotations

import numpy as np
import pytest

from service.core.errors import RequestError
from service.core.evaluation.scoring import (
    check_metric,
    coverage,
    interval_scores,
    mae,
    mase,
    mase_scale,
    msis,
    rmse,
    smape,
)


def test_rmse_by_hand() -> None:
    # errors 2 and 1 -> sqrt((4 + 1) / 2)
    assert rmse(np.array([9.0, 8.0]), np.array([7.0, 7.0])) == pytest.approx(np.sqrt(2.5))


def test_smape_by_hand_and_zero_pair() -> None:
    # 200 * 2 / 16 = 25; the 0/0 step counts as a perfect forecast.
    assert smape(np.array([9.0, 0.0]), np.array([7.0, 0.0])) == pytest.approx(12.5)


def test_missing_actuals_are_left_out() -> None:
    actual = np.array([9.0, np.nan, 8.0])
    forecast = np.array([7.0, 100.0, 7.0])
    assert rmse(actual, forecast) == pytest.approx(np.sqrt(2.5))
    assert coverage(actual, np.array([8.0, 0, 0]), np.array([10.0, 0, 0])) == pytest.approx(0.5)
    assert np.isnan(interval_scores(actual, forecast - 1, forecast + 1, 0.8)[1])


def test_msis_divides_by_scale() -> None:
    value = msis(np.array([8.0]), np.array([10.0]), np.array([20.0]), 0.95, scale=2.0)
    assert value == pytest.approx(45.0)


def test_mase_scale_falls_back_to_lag_one_without_a_full_season() -> None:
    assert mase_scale(np.array([1.0, 2.0, 4.0]), 12) == pytest.approx(1.5)


def test_mase_and_mae_by_hand_and_an_unknown_metric() -> None:
    a, f = np.array([9.0, 8.0]), np.array([7.0, 7.0])
    assert mase(a, f, 1.6) == pytest.approx(0.9375)
    assert mae(a, f) == pytest.approx(1.5)
    with pytest.raises(RequestError) as info:
        check_metric("mape")
    assert info.value.problems[0].field == "metric"


def test_interval_score_rejects_bad_level() -> None:
    with pytest.raises(RequestError):
        interval_scores(np.array([1.0]), np.array([0.0]), np.array([2.0]), 1.0)
