"""POST /v1/diagnostics through HTTP: verdicts for the demo series and awkward inputs answered."""

from __future__ import annotations

from typing import Any

import numpy as np

from service import demo


def _series(values: list[Any], start: str = "2025-01-01", frequency: str = "P1D") -> dict:
    return {"series": {"start": start, "frequency": frequency, "values": values}}


def test_the_demo_fuel_index_is_called_a_random_walk(client: Any) -> None:
    response = client.post("/v1/diagnostics", json=demo.request_body("fuel", "diagnostics"))
    assert response.status_code == 200
    body = response.json()
    assert body["random_walk"]["is_random_walk"] is True
    assert body["random_walk"]["reason"]
    assert body["random_walk"]["verdict"] in ("random_walk", "behaves_like_random_walk")
    assert body["random_walk"]["forecast_to_beat"] in ("naive", "drift")
    procedure = body["stationarity"]["unit_root_procedure"]
    assert (
        procedure["unit_root"] is True
        and body["stationarity"]["verdict"] == "difference_stationary"
    )
    assert procedure["power"]["observations"] == body["summary"]["length"]
    assert 0 < procedure["power"]["largest_distinguishable_coefficient"] < 1
    assert body["random_walk"]["evidence"]["unit_root"] == procedure
    assert any("random walk" in f for f in body["findings"])
    assert body["data_hash"].startswith("sha256:")


def test_monthly_energy_is_seasonal_with_period_12(client: Any) -> None:
    response = client.post("/v1/diagnostics", json=demo.request_body("energy", "diagnostics"))
    assert response.status_code == 200
    season = response.json()["seasonality"]
    assert season["seasonal_period_from_frequency"] == 12
    assert season["candidate_periods"][0]["period"] == 12
    assert season["seasonal_strength"] > 0.9


def test_a_constant_series_is_answered_with_tests_marked_not_applicable(client: Any) -> None:
    response = client.post("/v1/diagnostics", json=_series([5.0] * 40))
    assert response.status_code == 200
    body = response.json()
    for section in ("stationarity", "random_walk", "seasonality", "outliers"):
        assert body[section]["applicable"] is False, section
        assert "constant" in body[section]["reason"], section


def test_a_short_series_and_missing_values_are_answered(client: Any) -> None:
    short = client.post("/v1/diagnostics", json={**_series([1.0, 2.0, 4.0, 3.0]), "max_lag": 50})
    assert short.status_code == 200
    answered = short.json()
    assert answered["stationarity"]["verdict"] == "not_applicable"
    assert "at least 10" in answered["stationarity"]["adf_constant"]["reason"]
    acf = answered["autocorrelation"]["series"]
    assert acf["max_lag"] == 1 and acf["notes"] == ["max_lag 50 clamped to 1 for 4 observations"]
    rng = np.random.default_rng(3)
    values: list[Any] = list(np.round(rng.normal(10, 1, 60), 3))
    values[10] = values[11] = None
    gaps = client.post("/v1/diagnostics", json=_series(values))
    assert gaps.status_code == 200
    assert gaps.json()["summary"]["missing"] == 2


def test_components_come_back_when_asked(client: Any) -> None:
    plain = demo.request_body("energy", "diagnostics")
    without = client.post("/v1/diagnostics", json=plain).json()["seasonality"]["components"]
    response = client.post("/v1/diagnostics", json={**plain, "include": ["components"]})
    assert response.status_code == 200
    components = response.json()["seasonality"]["components"]
    n = len(plain["series"]["values"])
    assert without is None
    assert components["method"] == "stl" and len(components["timestamps"]) == n
    assert len(components["trend"]) == len(components["seasonal"]) == n
    # The parts add up to the series (no values were missing).
    total = np.add(np.add(components["trend"], components["seasonal"]), components["remainder"])
    np.testing.assert_allclose(total, plain["series"]["values"], rtol=1e-9)


def test_a_bad_series_is_a_problem_naming_the_field(client: Any) -> None:
    response = client.post("/v1/diagnostics", json=_series([1.0, "x", 3.0]))
    assert response.status_code == 422
    assert response.headers["content-type"].startswith("application/problem+json")
    assert response.json()["errors"][0]["field"] == "series.values[1]"
