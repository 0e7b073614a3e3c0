"""Seeded synthetic series with several seasonal periods, for tests and benchmarks.

Hourly request counts: Poisson around a level with a daily profile (quiet nights, busy
afternoons) and a weekly one (weekends at ``WEEKEND_FACTOR`` of weekdays), rising slowly.
Daily call volumes: Poisson around a level with a weekly profile (weekends lower) and a
yearly swing (winter higher), over whole years.
"""

from __future__ import annotations

from typing import Any

import numpy as np
import pandas as pd

HOURLY_LEVEL = 40.0
WEEKEND_FACTOR = 0.55
DAILY_LEVEL = 400.0
YEARLY_SWING = 0.25
DAILY_WEEKEND = 0.6


def hourly_rate(index: pd.DatetimeIndex) -> np.ndarray:
    """The expected count at each hour (the generating process, without noise)."""
    hour = index.hour.to_numpy()
    weekend = index.day_of_week.to_numpy() >= 5
    daily = 1.0 + 0.6 * np.sin(2.0 * np.pi * (hour - 9) / 24.0)
    weekly = np.where(weekend, WEEKEND_FACTOR, 1.0)
    steps = np.arange(index.size)
    return HOURLY_LEVEL * daily * weekly * (1.0 + 0.0002 * steps)


def hourly_counts(weeks: int = 6, seed: int = 14, extra: int = 0) -> pd.Series:
    """``weeks`` weeks of hourly counts from a Monday, plus ``extra`` hours (a holdout)."""
    index = pd.date_range("2026-01-05", periods=weeks * 168 + extra, freq="h")
    rng = np.random.default_rng(seed)
    return pd.Series(rng.poisson(hourly_rate(index)).astype(float), index=index, name="requests")


def daily_rate(index: pd.DatetimeIndex) -> np.ndarray:
    """The expected calls each day: weekly and yearly cycles on a slowly growing level."""
    weekend = index.day_of_week.to_numpy() >= 5
    day_of_year = index.day_of_year.to_numpy()
    yearly = 1.0 + YEARLY_SWING * np.cos(2.0 * np.pi * (day_of_year - 15) / 365.25)
    steps = np.arange(index.size)
    return DAILY_LEVEL * np.where(weekend, DAILY_WEEKEND, 1.0) * yearly * (1.0 + 0.0001 * steps)


def daily_calls(years: int = 3, seed: int = 14, extra: int = 0) -> pd.Series:
    """``years`` years of daily call counts from 2023-01-02, plus ``extra`` days."""
    index = pd.date_range("2023-01-02", periods=round(years * 365.25) + extra, freq="D")
    rng = np.random.default_rng(seed)
    return pd.Series(rng.poisson(daily_rate(index)).astype(float), index=index, name="calls")


def direct_mstl(values: np.ndarray, periods: list[int]) -> Any:
    """statsmodels' MSTL called directly with the settings the service states (for checks)."""
    from statsmodels.tsa.seasonal import MSTL

    return MSTL(
        values,
        periods=periods,
        windows=[51] * len(periods),
        iterate=2,
        stl_kwargs={
            "robust": False,
            "inner_iter": 2,
            "outer_iter": 0,
            "seasonal_deg": 0,
            "seasonal_jump": 6,
            "trend_jump": 5,
            "low_pass_jump": 3,
        },
    ).fit()
