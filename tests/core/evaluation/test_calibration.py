"""Empirical coverage and split-conformal factors on backtest errors."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from service.core.evaluation.calibration import (
    NARROW_FLOOR,
    apply,
    calibrate,
    conformal_quantile,
    narrowing,
    nonconformity,
    targets,
)
from service.core.evaluation.records import ModelBacktest, OriginForecast
from service.core.models.base import Forecast
from service.core.models.intervals import Interval, normal_quantile

Z80 = normal_quantile(0.8)


def synthetic(errors: np.ndarray, half_width: float, level: float = 0.8) -> ModelBacktest:
    """Origins with point 0, a symmetric interval ±half_width and the given actual values."""
    forecasts = tuple(
        OriginForecast(
            origin=pd.Timestamp("2020-01-01") + pd.DateOffset(months=k),
            actual=row,
            point=np.zeros_like(row),
            lower={level: np.full_like(row, -half_width)},
            upper={level: np.full_like(row, half_width)},
            scale=1.0,
        )
        for k, row in enumerate(errors)
    )
    return ModelBacktest({"family": "test"}, "Test", forecasts, (level,), 0.0, 0.0)


def test_nonconformity_by_hand() -> None:
    bt = synthetic(np.array([[0.5, -3.0, np.nan]]), half_width=2.0)
    assert nonconformity(bt, 0.8) == pytest.approx([0.25, 1.5])


def test_conformal_quantile_rank() -> None:
    scores = np.arange(1.0, 10.0)
    # n = 9: rank ceil(10 * 0.8) = 8 -> the 8th smallest.
    assert conformal_quantile(scores, 0.8) == 8.0
    assert conformal_quantile(scores, 0.95) == 9.0


def test_too_few_origins_keep_model_intervals() -> None:
    bt = synthetic(np.ones((3, 4)), half_width=2.0)
    result = calibrate(bt)
    assert not result.applied and result.factor(0.8) == 1.0
    assert result.levels[0].empirical == 1.0


def test_calibration_restores_coverage_of_too_narrow_intervals() -> None:
    rng = np.random.default_rng(11)
    # The model believes sd = 1 but errors have sd = 2: its 80 % interval covers ~48 %.
    bt = synthetic(rng.normal(scale=2.0, size=(8, 12)), half_width=Z80)
    result = calibrate(bt)
    assert result.applied
    assert result.levels[0].empirical < 0.65
    assert result.factor(0.8) == pytest.approx(2.0, rel=0.25)
    fresh = rng.normal(scale=2.0, size=20_000)
    width = Z80 * result.factor(0.8)
    assert np.mean(np.abs(fresh) <= width) == pytest.approx(0.8, abs=0.06)


def test_too_wide_intervals_are_narrowed_below_90_as_far_as_the_evidence_goes() -> None:
    rng = np.random.default_rng(12)
    # The model believes sd = 2 but errors have sd = 1: its 80 % interval covers ~99 %.
    bt = synthetic(rng.normal(scale=1.0, size=(8, 12)), half_width=2 * Z80)
    result = calibrate(bt)
    assert result.applied
    assert result.levels[0].empirical > 0.95
    scores = nonconformity(bt, 0.8)
    q = conformal_quantile(scores, 0.8)
    assert q < 0.7
    # Narrowed past the old fixed floor of 0.9, but not all the way to the conformal quantile:
    # only to the quantile at the upper confidence limit of the 80 % level (96 scores).
    assert q < result.factor(0.8) < 0.9
    assert result.factor(0.8) >= NARROW_FLOOR
    assert result.factor(0.8) == narrowing(scores, 0.8, 96)


def test_overlapping_windows_are_less_evidence_than_their_scores() -> None:
    rng = np.random.default_rng(12)
    bt = synthetic(rng.normal(scale=1.0, size=(8, 12)), half_width=2 * Z80)
    index = pd.date_range("2020-01-01", periods=40, freq="MS")
    # Eight windows of 12 months starting a month apart cover 8 + 11 distinct months.
    assert targets(bt, index) == 19
    assert targets(bt, None) == 96
    scores = nonconformity(bt, 0.8)
    assert narrowing(scores, 0.8, 19) > narrowing(scores, 0.8, 96)
    assert calibrate(bt, index=index).factor(0.8) == narrowing(scores, 0.8, 19)


def test_intervals_covering_a_little_more_than_claimed_keep_their_width() -> None:
    # 24 scores, 21 inside (87.5 %): above 80 %, but within chance of it for 24 targets.
    scores = np.concatenate([np.linspace(0.1, 0.95, 21), [1.2, 1.5, 2.0]])
    assert conformal_quantile(scores, 0.8) < 1.0
    assert narrowing(scores, 0.8, 24) == 1.0
    # Too few targets for any evidence: the confidence limit passes 100 %.
    assert narrowing(np.full(5, 0.1), 0.8, 5) == 1.0


def test_too_wide_intervals_at_95_are_never_narrowed() -> None:
    rng = np.random.default_rng(12)
    bt = synthetic(rng.normal(scale=1.0, size=(8, 12)), half_width=4 * Z80, level=0.95)
    result = calibrate(bt)
    assert result.applied
    assert conformal_quantile(nonconformity(bt, 0.95), 0.95) < 0.9
    assert result.factor(0.95) == 1.0


def test_apply_scales_each_side_and_keeps_levels_nested() -> None:
    from service.core.evaluation.calibration import Calibration, LevelCalibration

    point = np.array([10.0, 10.0])
    forecast = Forecast(
        pd.date_range("2021-01-01", periods=2, freq="MS"),
        point,
        (
            Interval(0.8, np.array([8.0, 7.0]), np.array([11.0, 13.0])),
            Interval(0.95, np.array([7.0, 6.0]), np.array([12.0, 14.0])),
        ),
    )
    calib = Calibration(
        6, True, "test", (LevelCalibration(0.8, 0.5, 2.0, 12), LevelCalibration(0.95, 1.0, 1.0, 12))
    )
    out = apply(forecast, calib)
    assert out.intervals[0].lower == pytest.approx([6.0, 4.0])
    assert out.intervals[0].upper == pytest.approx([12.0, 16.0])
    # The 95 % interval is widened to contain the rescaled 80 % one.
    assert out.intervals[1].lower == pytest.approx([6.0, 4.0])
    assert out.intervals[1].upper == pytest.approx([12.0, 16.0])


def test_zero_width_intervals_that_missed_stop_at_the_bound() -> None:
    # Naive after a run of zeros has intervals of zero width; when the actual values then
    # leave them, the scores are infinite and the factor stops at the upper bound.
    errors = np.array([[0.0, 0.0, 0.0]] * 4 + [[5.0, 6.0, 4.0]] * 3)
    result = calibrate(synthetic(errors, half_width=0.0, level=0.95))
    assert result.applied
    assert result.factor(0.95) == 3.0
    assert np.isinf(nonconformity(synthetic(errors, 0.0, 0.95), 0.95)).any()


def test_a_level_without_scores_keeps_the_model_interval() -> None:
    bt = synthetic(np.full((6, 3), np.nan), half_width=1.0)
    result = calibrate(bt)
    assert result.applied and np.isnan(result.levels[0].factor)
    assert result.factor(0.8) == 1.0
