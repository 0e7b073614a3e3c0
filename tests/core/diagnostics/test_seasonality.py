"""Strengths, candidate periods and outliers on seeded series."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from service.core.applicability import NotApplicable
from service.core.diagnostics.autocorrelation import sample_acf, white_noise_band
from service.core.diagnostics.seasonality import (
    Decomposition,
    Outliers,
    candidate_periods,
    decompose,
    outliers,
    seasonal_strength,
    trend_strength,
)


def _monthly_sinusoid(seed: int, n: int = 240) -> np.ndarray:
    rng = np.random.default_rng(seed)
    return 50 + 10 * np.sin(2 * np.pi * np.arange(n) / 12) + rng.normal(size=n)


@pytest.mark.parametrize("seed", range(5))
def test_sinusoid_has_period_12_and_strong_season(seed: int) -> None:
    x = _monthly_sinusoid(seed)
    d = decompose(x, 12)
    assert isinstance(d, Decomposition) and d.method == "stl"
    assert seasonal_strength(d) > 0.9
    detrended = x - d.trend
    found = candidate_periods(detrended, sample_acf(detrended, 60), white_noise_band(x.size))
    assert found[0].period == 12
    assert "periodogram" in found[0].found_by and "acf" in found[0].found_by


@pytest.mark.parametrize("seed", range(5))
def test_white_noise_has_weak_season_and_trend(seed: int) -> None:
    x = np.random.default_rng(seed).normal(size=240)
    d = decompose(x, 12)
    assert isinstance(d, Decomposition)
    # Smoothers keep some noise: about 0.2 for the season, 0.1 for the trend (measured).
    assert seasonal_strength(d) < 0.35
    assert trend_strength(d) < 0.3


def test_random_walk_has_strong_trend_from_the_non_seasonal_smoother() -> None:
    x = np.cumsum(np.random.default_rng(4).normal(size=300))
    d = decompose(x, 1)
    assert isinstance(d, Decomposition) and d.method == "lowess"
    assert seasonal_strength(d) is None
    assert d.seasonal_reason is not None and "non-seasonal" in d.seasonal_reason
    assert trend_strength(d) > 0.8


def test_fewer_than_two_seasons_fall_back_with_a_reason() -> None:
    d = decompose(np.random.default_rng(0).normal(size=20), 12)
    assert isinstance(d, Decomposition) and d.method == "lowess"
    assert d.seasonal_reason is not None and "two full seasons" in d.seasonal_reason
    assert isinstance(decompose(np.arange(5.0), 1), NotApplicable)


def test_a_spike_is_the_outlier_and_its_season_neighbours_are_not() -> None:
    x = _monthly_sinusoid(0)
    x[100] += 30
    d = decompose(x, 12)
    assert isinstance(d, Decomposition)
    index = pd.date_range("2000-01-01", periods=x.size, freq="MS")
    found = outliers(d.remainder, x, np.ones(x.size, dtype=bool), index)
    assert isinstance(found, Outliers)
    flagged = {p.timestamp for p in found.points}
    assert index[100] in flagged
    assert not flagged & {index[88], index[112]}
    assert max(found.points, key=lambda p: p.score).timestamp == index[100]


def test_interpolated_points_are_never_flagged() -> None:
    x = _monthly_sinusoid(1)
    x[50] += 40
    observed = np.ones(x.size, dtype=bool)
    observed[50] = False
    d = decompose(x, 12)
    assert isinstance(d, Decomposition)
    index = pd.date_range("2000-01-01", periods=x.size, freq="MS")
    found = outliers(d.remainder, x, observed, index)
    assert isinstance(found, Outliers)
    assert index[50] not in {p.timestamp for p in found.points}
