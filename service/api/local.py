"""Answer a request in process, without HTTP or the pool (the `windvane forecast` command)."""

from __future__ import annotations

from typing import Any

from service.api import render
from service.api.caching import provenance_fields
from service.api.diagnostics_body import diagnostics_body
from service.api.schemas.backtests import BacktestRequest
from service.api.schemas.diagnostics import DiagnosticsRequest
from service.api.schemas.forecasts import ForecastRequest
from service.api.tasks import backtest_task, diagnostics_task, forecast_task
from service.config import Settings
from service.runtime import jobs
from service.runtime.keys import data_key


def answer(path: str, raw: str, settings: Settings | None = None) -> dict[str, Any]:
    """The body the endpoint at ``path`` would return for the JSON ``raw``."""
    settings = settings or Settings()
    if path == "/v1/forecasts":
        request = ForecastRequest.model_validate_json(raw)
        task, series = forecast_task(request, settings)
        body = render.forecast_answer(jobs.forecast(task))
        body["provenance"] = {
            "data_hash": data_key(series.y).label,
            "cache": "off",
            **provenance_fields(settings.library_versions),
        }
        return body
    if path == "/v1/diagnostics":
        diagnostics = diagnostics_task(DiagnosticsRequest.model_validate_json(raw), settings)
        report, found = jobs.diagnostics(diagnostics)
        return {
            **diagnostics_body(report, found),
            "data_hash": data_key(diagnostics.y).label,
        }
    if path == "/v1/backtests":
        backtest = backtest_task(BacktestRequest.model_validate_json(raw), settings)
        result, found = jobs.backtests(backtest)
        return {**render.backtest_body(result, found), "data_hash": data_key(backtest.y).label}
    raise ValueError(f"no local answer for {path}")
