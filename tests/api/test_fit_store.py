"""The fit store behind POST /v1/forecasts: a new horizon reuses the fitted model, and a
corrupt entry on disk is recomputed, never a 500."""

from __future__ import annotations

from pathlib import Path
from typing import Any

from service import demo


def _body(horizon: int) -> dict[str, Any]:
    body = demo.request_body("orders", horizon=horizon)
    body["model"] = {
        "family": "ets",
        "error": "add",
        "trend": "add",
        "damped": True,
        "season": "none",
    }
    return body


def _entries(directory: Path) -> list[Path]:
    return [p for p in directory.rglob("*") if p.is_file() and p.stat().st_size > 0]


def test_a_new_horizon_reuses_the_stored_fit(make_client: Any, tmp_path: Path) -> None:
    cache_dir = tmp_path / "fits"
    with make_client(cache_dir=cache_dir) as client:
        first = client.post("/v1/forecasts", json=_body(3))
        assert first.status_code == 200
        assert _entries(cache_dir), "the fitted model was not stored"
        second = client.post("/v1/forecasts", json=_body(6))
        assert second.status_code == 200
        # A response-cache miss (new horizon) answered from the same fitted model.
        assert second.headers["cache-status"] == (
            "windvane-fitted; hit, windvane-response; fwd=miss; stored"
        )
        assert second.json()["point"][:3] == first.json()["point"]
        assert second.json()["model"]["parameters"] == first.json()["model"]["parameters"]
        metrics = client.get("/metrics").text
        assert 'windvane_cache_lookups_total{level="fitted",result="hit"} 1.0' in metrics


def test_a_truncated_entry_is_recomputed(make_client: Any, tmp_path: Path) -> None:
    cache_dir = tmp_path / "fits"
    with make_client(cache_dir=cache_dir) as client:
        first = client.post("/v1/forecasts", json=_body(3))
        assert first.status_code == 200
        for entry in _entries(cache_dir):
            entry.write_bytes(entry.read_bytes()[:7])
        again = client.post("/v1/forecasts", json=_body(4))
        assert again.status_code == 200
        assert again.json()["point"][:3] == first.json()["point"]
        metrics = client.get("/metrics").text
        assert 'windvane_cache_lookups_total{level="fitted",result="error"} 1.0' in metrics
        # The entry was replaced by a good one: the next new horizon is a stored-fit hit.
        third = client.post("/v1/forecasts", json=_body(5))
        assert third.status_code == 200
        metrics = client.get("/metrics").text
        assert 'windvane_cache_lookups_total{level="fitted",result="hit"} 1.0' in metrics
