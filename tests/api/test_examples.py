"""The OpenAPI examples: from the demo scenario, real answers, and valid against the schema."""

from __future__ import annotations

import json

import numpy as np

from service.api import examples
from service.api.openapi import schema_text
from service.api.schemas.backtests import BacktestRequest
from service.api.schemas.batches import BatchRequest
from service.api.schemas.diagnostics import DiagnosticsRequest
from service.api.schemas.forecasts import ForecastRequest, ForecastResponse

FIX = "run `python -m service.api.examples` and commit service/api/examples.json"


def _numbers(value: object) -> list[float]:
    if isinstance(value, bool):
        return []
    if isinstance(value, (int, float)):
        return [float(value)]
    if isinstance(value, list):
        return [x for v in value for x in _numbers(v)]
    if isinstance(value, dict):
        return [x for k in sorted(value) for x in _numbers(value[k])]
    return []


def _shape(value: object) -> object:
    if isinstance(value, dict):
        return {k: _shape(v) for k, v in sorted(value.items()) if k != "library_versions"}
    if isinstance(value, list):
        return [_shape(v) for v in value]
    return type(value).__name__ if not isinstance(value, (int, float)) else "number"


def test_request_examples_are_valid_requests() -> None:
    ForecastRequest.model_validate(examples.forecast_request())
    DiagnosticsRequest.model_validate(examples.diagnostics_request())
    BacktestRequest.model_validate(examples.backtest_request())
    BatchRequest.model_validate(examples.batch_request())


def test_the_forecast_response_example_matches_the_response_schema() -> None:
    ForecastResponse.model_validate(examples.responses()["forecast"])


def test_committed_response_examples_are_what_the_service_answers_now() -> None:
    committed = examples.responses()
    fresh = json.loads(examples.text())
    assert set(committed) == set(fresh) == {"forecast", "diagnostics", "backtest"}, FIX
    for name in committed:
        assert _shape(committed[name]) == _shape(fresh[name]), f"{name}: {FIX}"
        np.testing.assert_allclose(
            _numbers(committed[name]),
            _numbers(fresh[name]),
            rtol=1e-3,
            atol=1e-3,
            err_msg=f"{name}: {FIX}",
        )


def test_every_post_operation_shows_a_demo_request_example() -> None:
    schema = json.loads(schema_text())
    for path in ("/v1/forecasts", "/v1/diagnostics", "/v1/backtests", "/v1/forecast-batches"):
        body = schema["paths"][path]["post"]["requestBody"]["content"]["application/json"]
        assert "demo" in body["examples"], path
