"""WINDVANE_LIBRARY_VERSIONS=false: no answer names the exact Python or library versions.

Every route and representation is asked, and the whole answer (headers and body) is
searched for the version strings; with the default setting /metrics and provenance do
name them, so the search is known to find them.
"""

from __future__ import annotations

from collections.abc import Callable

from fastapi.testclient import TestClient

from service import demo
from service.runtime.keys import runtime_versions

LIBRARIES = ("python", "numpy", "pandas", "scipy", "statsmodels")


def answers(client: TestClient) -> dict[str, str]:
    """Headers and body of one answer of every kind, by a short name."""
    forecast = {**demo.request_body("orders"), "model": {"family": "naive"}}
    series = forecast["series"]
    csv = "timestamp,value\n" + "".join(
        f"2024-{1 + i // 28:02d}-{1 + i % 28:02d},{v}\n"
        for i, v in enumerate(series["values"][:56])
    )
    calls = {
        "forecast": ("POST", "/v1/forecasts", {"json": forecast}),
        "forecast-csv": (
            "POST",
            "/v1/forecasts?horizon=3",
            {"content": csv, "headers": {"content-type": "text/csv", "accept": "text/csv"}},
        ),
        "batch": ("POST", "/v1/forecast-batches", {"json": {"requests": [forecast]}}),
        "batch-ndjson": (
            "POST",
            "/v1/forecast-batches",
            {"json": {"requests": [forecast]}, "headers": {"accept": "application/x-ndjson"}},
        ),
        "diagnostics": ("POST", "/v1/diagnostics", {"json": {"series": series}}),
        "backtest": (
            "POST",
            "/v1/backtests",
            {"json": {"series": series, "horizon": 2, "models": ["naive"]}},
        ),
        "problem": ("POST", "/v1/forecasts", {"json": {"series": series, "horizon": 0}}),
        "metrics": ("GET", "/metrics", {}),
        "readyz": ("GET", "/readyz", {}),
        "healthz": ("GET", "/healthz", {}),
        "models": ("GET", "/v1/models", {}),
        "openapi": ("GET", "/openapi.json", {}),
        "docs": ("GET", "/docs", {}),
    }
    found = {}
    for name, (method, path, options) in calls.items():
        response = client.request(method, path, **options)  # type: ignore[arg-type]
        assert response.status_code < 500, (name, response.text[:300])
        found[name] = str(dict(response.headers)) + response.text
    return found


def test_hidden_versions_appear_nowhere(shared_client: Callable[..., TestClient]) -> None:
    versions = runtime_versions()
    for name, text in answers(shared_client(library_versions=False)).items():
        for library in LIBRARIES:
            assert f'"{versions[library]}"' not in text, (name, library)
            assert f"{library}=" not in text, (name, library)
    shown = answers(shared_client())
    assert f'numpy="{versions["numpy"]}"' in shown["metrics"]
    assert f'"numpy":"{versions["numpy"]}"' in shown["forecast"]
