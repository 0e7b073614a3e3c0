"""Request and response examples for the OpenAPI document, all from the demo scenario.

Requests are built from ``service.demo`` when the schema is made (cheap: no statistics).
Responses are real answers of the service, abbreviated, written to ``examples.json`` by
``python -m service.api.examples`` (a test fails when that file is stale), so the schema
never runs a fit.
"""

from __future__ import annotations

import json
from functools import cache
from importlib import resources
from pathlib import Path
from typing import Any

from service import demo

EXAMPLES_FILE = "examples.json"


def _short(name: str, points: int) -> dict[str, Any]:
    series = demo.series_body(name)
    series["values"] = series["values"][:points]
    return series


def forecast_request() -> dict[str, Any]:
    """Weekly orders, an explicit damped-trend ETS, three weeks ahead."""
    return {
        "series": _short("orders", 104),
        "horizon": 3,
        "coverage": [0.8, 0.95],
        "model": {
            "family": "ets",
            "error": "add",
            "trend": "add",
            "damped": True,
            "season": "none",
        },
    }


def diagnostics_request() -> dict[str, Any]:
    """The fuel price index, a random walk."""
    return {"series": _short("fuel", 120), "max_lag": 14}


def backtest_request() -> dict[str, Any]:
    """Weekly orders: naive against seasonal naive over three origins."""
    return {
        "series": _short("orders", 130),
        "models": [{"family": "naive"}, {"family": "drift"}],
        "horizon": 4,
        "origins": 3,
        "step": 4,
    }


def batch_request() -> dict[str, Any]:
    """Two forecasts in one call."""
    first = forecast_request()
    second = {
        "series": _short("spares", 90),
        "horizon": 7,
        "model": {"family": "croston", "variant": "sba"},
    }
    return {"requests": [first, second]}


@cache
def responses() -> dict[str, Any]:
    """The committed response examples (empty when the file is absent)."""
    try:
        text = resources.files("service.api").joinpath(EXAMPLES_FILE).read_text("utf-8")
    except FileNotFoundError:
        return {}
    found: dict[str, Any] = json.loads(text)
    return found


def _abbreviated(value: Any, keep: int = 6) -> Any:
    """Long lists cut to ``keep`` items and floats rounded, so the schema stays readable."""
    if isinstance(value, float):
        return round(value, 4)
    if isinstance(value, list):
        return [_abbreviated(v, keep) for v in value[:keep]]
    if isinstance(value, dict):
        # Timings differ run to run; a fixed figure keeps the committed file stable.
        return {k: (0.05 if "seconds" in k else _abbreviated(v, keep)) for k, v in value.items()}
    return value


def generate() -> dict[str, Any]:
    """Answer every example request in process (no server) and abbreviate the answers."""
    from service.api.local import answer

    out = {}
    for name, body in (
        ("forecast", forecast_request()),
        ("diagnostics", diagnostics_request()),
        ("backtest", backtest_request()),
    ):
        path = {
            "forecast": "/v1/forecasts",
            "diagnostics": "/v1/diagnostics",
            "backtest": "/v1/backtests",
        }[name]
        found = answer(path, json.dumps(body))
        if "provenance" in found:
            found["provenance"]["library_versions"] = {"numpy": "...", "statsmodels": "..."}
        out[name] = _abbreviated(found)
    return out


def text() -> str:
    """The examples file's content."""
    return json.dumps(generate(), indent=1, sort_keys=True) + "\n"


def request_examples(name: str) -> dict[str, Any]:
    """The ``openapi_examples`` of one endpoint's request body."""
    build = {
        "forecast": forecast_request,
        "diagnostics": diagnostics_request,
        "backtest": backtest_request,
        "batch": batch_request,
    }[name]
    return {"demo": {"summary": "From the demo scenario", "value": build()}}


def response_example(name: str) -> dict[int | str, dict[str, Any]]:
    """A ``responses`` entry with the 200 example of one endpoint (none when absent)."""
    found = responses().get(name)
    if found is None:
        return {}
    return {200: {"content": {"application/json": {"example": found}}}}


if __name__ == "__main__":
    Path(__file__).with_name(EXAMPLES_FILE).write_text(text(), encoding="utf-8")
