"""A real Prometheus server scrapes a running `windvane serve` and finds its request counter."""

from __future__ import annotations

import shutil
import subprocess
import time
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path
from typing import Any

import httpx
import pytest
import yaml
from live_server import LiveServer, free_port, running

PROMETHEUS = shutil.which("prometheus")

pytestmark = [
    pytest.mark.server,
    pytest.mark.slow,
    pytest.mark.skipif(
        PROMETHEUS is None,
        reason="the prometheus binary is not installed (Debian package `prometheus`; "
        ".ci/run installs it)",
    ),
]
WAIT_SECONDS = 45.0


@contextmanager
def prometheus(directory: Path, target: str) -> Iterator[str]:
    """A Prometheus on a free loopback port scraping ``target`` every second; its base URL."""
    config = {
        "global": {"scrape_interval": "1s", "evaluation_interval": "1s", "scrape_timeout": "1s"},
        "scrape_configs": [{"job_name": "windvane", "static_configs": [{"targets": [target]}]}],
    }
    (directory / "prometheus.yml").write_text(yaml.safe_dump(config))
    port = free_port()
    log = directory / "prometheus.log"
    with log.open("wb") as sink:
        process = subprocess.Popen(
            [
                str(PROMETHEUS),
                f"--config.file={directory / 'prometheus.yml'}",
                f"--storage.tsdb.path={directory / 'data'}",
                f"--web.listen-address=127.0.0.1:{port}",
            ],
            stdout=sink,
            stderr=subprocess.STDOUT,
            cwd=directory,
        )
    url = f"http://127.0.0.1:{port}"
    try:
        deadline = time.monotonic() + WAIT_SECONDS
        while True:
            assert process.poll() is None, log.read_text(errors="replace")[-3000:]
            try:
                if httpx.get(url + "/-/ready", timeout=1).status_code == 200:
                    break
            except httpx.TransportError:
                pass
            assert time.monotonic() < deadline, "Prometheus never became ready"
            time.sleep(0.2)
        yield url
    finally:
        process.terminate()
        try:
            process.wait(timeout=15)
        except subprocess.TimeoutExpired:
            process.kill()
            process.wait(timeout=5)


def traffic(server: LiveServer) -> None:
    """A few requests with distinct route, method and status labels."""
    series = {"start": "2025-01-06", "frequency": "P1W", "values": [412, 398, 455, 430, 441, 470]}
    ok = httpx.post(
        server.url + "/v1/forecasts",
        timeout=30,
        json={"series": series, "horizon": 3, "model": {"family": "naive"}},
    )
    assert ok.status_code == 200, ok.text
    bad = httpx.post(
        server.url + "/v1/forecasts", timeout=30, json={"series": series, "horizon": 0}
    )
    assert bad.status_code == 422, bad.text
    assert httpx.get(server.url + "/v1/models", timeout=10).status_code == 200


def query(url: str, expression: str) -> list[dict[str, Any]]:
    answer = httpx.get(url + "/api/v1/query", params={"query": expression}, timeout=5).json()
    assert answer["status"] == "success", answer
    found: list[dict[str, Any]] = answer["data"]["result"]
    return found


def wait_for(url: str, expression: str, wanted: dict[str, str]) -> list[dict[str, Any]]:
    deadline = time.monotonic() + WAIT_SECONDS
    while time.monotonic() < deadline:
        found = query(url, expression)
        if any(wanted.items() <= r["metric"].items() for r in found):
            return found
        time.sleep(0.5)
    raise AssertionError(f"{expression} never showed {wanted}; last: {query(url, expression)}")


def test_prometheus_scrapes_request_counts_by_route_method_and_status(tmp_path: Path) -> None:
    (tmp_path / "windvane").mkdir()
    (tmp_path / "prometheus").mkdir()
    with running(tmp_path / "windvane", cache="off") as server:
        target = server.url.removeprefix("http://")
        with prometheus(tmp_path / "prometheus", target) as url:
            traffic(server)
            wanted = {
                "__name__": "windvane_requests_total",
                "job": "windvane",
                "instance": target,
                "route": "/v1/forecasts",
                "method": "POST",
            }
            # Each label set on its own: one scrape may fall between two of the requests.
            for route, method, status in (
                ("/v1/forecasts", "POST", "422"),
                ("/v1/forecasts", "POST", "200"),
                ("/v1/models", "GET", "200"),
            ):
                wait_for(
                    url,
                    "windvane_requests_total",
                    {**wanted, "route": route, "method": method, "status": status},
                )
            found = query(url, 'windvane_requests_total{job="windvane"}')
            up = query(url, 'up{job="windvane"}')
    by_labels = {
        (r["metric"]["route"], r["metric"]["method"], r["metric"]["status"]): float(r["value"][1])
        for r in found
    }
    assert by_labels[("/v1/forecasts", "POST", "200")] >= 1
    assert by_labels[("/v1/forecasts", "POST", "422")] >= 1
    assert by_labels[("/v1/models", "GET", "200")] >= 1
    # Route templates only: no raw paths or query strings minted as label values.
    assert all(route.startswith("/") or route == "unmatched" for route, _, _ in by_labels)
    assert [r["value"][1] for r in up] == ["1"]
