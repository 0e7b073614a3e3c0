"""The entry point: JSON-ready body, robustness (constant, short, missing) and argument checks."""

from __future__ import annotations

import json
from typing import Any

import numpy as np
import pandas as pd
import pytest

from service.api.diagnostics_body import diagnostics_body
from service.core.diagnostics.report import diagnose
from service.core.errors import RequestError, SeriesError


def _series(values: np.ndarray, freq: str = "MS") -> pd.Series:
    return pd.Series(values, index=pd.date_range("2010-01-01", periods=values.size, freq=freq))


def _body(y: pd.Series, period: int, **options: Any) -> dict[str, Any]:
    body = diagnostics_body(diagnose(y, period, **options), [])
    json.dumps(body, allow_nan=False)  # raises on NaN, inf or non-JSON types
    return body


def test_seasonal_series_body() -> None:
    rng = np.random.default_rng(5)
    values = 200 + 20 * np.sin(2 * np.pi * np.arange(120) / 12) + rng.normal(size=120)
    y = _series(values)
    body = _body(y, 12, include_components=True)
    summary = body["summary"]
    assert summary["length"] == 120 and summary["missing"] == 0
    assert summary["first_timestamp"] == "2010-01-01T00:00:00"
    assert summary["last_timestamp"] == "2019-12-01T00:00:00"
    assert summary["frequency"] == "MS" and summary["seasonal_period"] == 12
    np.testing.assert_allclose(summary["standard_deviation"], values.std(ddof=1))
    assert body["differencing"]["seasonal_differences"] == 1
    assert body["seasonality"]["candidate_periods"][0]["period"] == 12
    components = body["seasonality"]["components"]
    assert len(components["trend"]) == len(components["seasonal"]) == 120
    np.testing.assert_allclose(
        np.add(components["trend"], components["seasonal"]) + components["remainder"], values
    )
    assert body["autocorrelation"]["series"]["max_lag"] == 24
    assert body["autocorrelation"]["differenced"]["differenced_series"] == "Δ12 y"
    assert "Dolado" in body["stationarity"]["decision_rule"]
    assert body["stationarity"]["verdict"] == "stationary"
    assert any("Seasonality is strong" in f for f in body["findings"])


def test_random_walk_is_flagged_for_model_selection() -> None:
    y = _series(np.cumsum(np.random.default_rng(0).normal(size=200)), "D")
    result = diagnose(y, 7)
    assert result.is_random_walk
    assert any("random walk" in f for f in result.findings)


def test_constant_series_gives_reasons_not_exceptions() -> None:
    body = _body(_series(np.full(60, 4.0)), 12)
    for section in ("stationarity", "random_walk", "seasonality", "outliers"):
        assert body[section] == {"applicable": False, "reason": "the series is constant"}
    assert body["autocorrelation"]["series"]["applicable"] is False
    assert body["differencing"]["regular_differences"] == 0
    assert body["summary"]["share_of_zeros"] == 0.0
    assert body["findings"] == ["No statistical test applies: the series is constant."]


def test_too_short_series_gives_reasons_not_exceptions() -> None:
    body = _body(_series(np.array([3.0, 1.0, 4.0, 1.0, 5.0])), 12, max_lag=10)
    assert body["stationarity"]["adf_constant"]["applicable"] is False
    assert "at least 10" in body["stationarity"]["adf_constant"]["reason"]
    assert body["seasonality"]["applicable"] is False
    assert body["autocorrelation"]["series"]["max_lag"] == 1
    assert any("clamped" in n for n in body["autocorrelation"]["series"]["notes"])


def test_missing_values_are_interpolated_and_said() -> None:
    values = np.cumsum(np.random.default_rng(3).normal(size=150)) + 50
    values[[0, 1, 40, 41, 42, 149]] = np.nan
    body = _body(_series(values), 12)
    assert body["summary"]["missing"] == 6
    assert body["summary"]["first_timestamp"] == "2010-01-01T00:00:00"
    assert any("3 interpolated, 3 dropped" in n for n in body["notes"])
    assert any("interpolated" in n for n in body["stationarity"]["notes"])
    assert body["findings"][0].startswith("6 of 150 values are missing")


def test_all_missing_gives_reasons() -> None:
    body = _body(_series(np.full(12, np.nan)), 1)
    assert body["summary"]["mean"] is None
    assert body["random_walk"]["applicable"] is False


def test_bad_arguments_name_their_field() -> None:
    y = _series(np.arange(30.0))
    with pytest.raises(RequestError) as lag:
        diagnose(y, 1, max_lag=0)
    assert lag.value.problems[0].field == "max_lag"
    with pytest.raises(RequestError) as period:
        diagnose(y, -2)
    assert period.value.problems[0].field == "series.seasonal_period"
    with pytest.raises(SeriesError):
        diagnose(pd.Series([1.0, 2.0, 3.0]), 1)


def test_input_is_not_mutated() -> None:
    values = np.cumsum(np.random.default_rng(9).normal(size=80))
    values[10] = np.nan
    y = _series(values)
    before = y.copy()
    diagnose(y, 12)
    pd.testing.assert_series_equal(y, before)
