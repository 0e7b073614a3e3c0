"""STL + base: long periods, the last seasonal cycle re-added, base intervals, field errors."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from numpy.testing import assert_allclose
from statsmodels.tsa.seasonal import STL

from service.core.errors import FitError
from service.core.models import registry
from service.core.models.stl import StlSpec


def hourly(weeks: int = 4, seed: int = 2) -> pd.Series:
    rng = np.random.default_rng(seed)
    n = 168 * weeks
    t = np.arange(n)
    values = 40 + 8 * np.sin(2 * np.pi * t / 168) + rng.normal(0, 1, n)
    return pd.Series(values, index=pd.date_range("2025-03-03", periods=n, freq="h"))


def test_weekly_period_on_hourly_data_is_re_added_from_the_last_cycle() -> None:
    y = hourly()
    spec = registry.specification_from_dict({"family": "stl", "robust": True})
    fitted = spec.fit(y, 168)
    seasonal = STL(y.to_numpy(), period=168, robust=True).fit().seasonal
    inner = fitted.base.forecast(200, [0.9])
    forecast = fitted.forecast(200, [0.9])
    cycle = seasonal[-168:]
    assert_allclose(forecast.point - inner.point, cycle[np.arange(200) % 168], atol=1e-9)
    width = forecast.intervals[0].upper - forecast.intervals[0].lower
    assert_allclose(width, inner.intervals[0].upper - inner.intervals[0].lower)
    assert fitted.describe().label.startswith("STL (period 168) then ")


def test_arima_base_is_accepted_and_fitted_without_season() -> None:
    spec = registry.specification_from_dict(
        {"family": "stl", "base": {"family": "arima", "order": [1, 0, 0]}}
    )
    fitted = spec.fit(hourly(3), 168)
    assert fitted.describe().label == "STL (period 168) then ARIMA(1,0,0), constant: mean"


def test_fewer_than_two_seasons_is_a_fit_error() -> None:
    with pytest.raises(FitError) as caught:
        StlSpec().fit(hourly(1), 168)
    assert caught.value.problems[0].field == "series.values"


def test_a_seasonal_base_is_refused_under_model_base() -> None:
    base = {"family": "arima", "order": [1, 0, 0], "seasonal_order": [0, 1, 1]}
    spec = StlSpec(base=registry.specification_from_dict(base))
    with pytest.raises(FitError) as caught:
        spec.fit(hourly(2), 168)
    assert caught.value.problems[0].field == "model.base.seasonal_order"


def test_refilter_on_a_longer_history_repeats_the_last_fitted_cycle() -> None:
    y = hourly()
    fitted = StlSpec().fit(y.iloc[:-168], 168)
    longer = fitted.refilter(y)
    assert_allclose(longer.seasonal.iloc[:-168], fitted.seasonal)
    assert_allclose(longer.seasonal.iloc[-168:].to_numpy(), fitted.seasonal.iloc[-168:].to_numpy())
