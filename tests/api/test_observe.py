"""The runtime wired into the app: cache hits, Cache-Status, metrics, logs, readiness, 503s."""

from __future__ import annotations

import io
import json
import shutil
import subprocess
import time
from collections.abc import Iterator
from pathlib import Path

import pytest
from fastapi.testclient import TestClient

from service.api.app import create_app
from service.api.auth import key_digest
from service.config import Settings
from service.runtime import logs
from service.runtime.pool import BudgetExceeded, PoolBusy

BODY = {
    "series": {
        "start": "2025-01-06",
        "frequency": "W-MON",
        "values": [12.0, 14.0, 13.5, 15.0, 16.25, 15.5, 17.0, 18.0, 17.5, 19.0],
        "name": "north depot orders",
    },
    "horizon": 4,
    "coverage": [0.8, 0.95],
    "model": {"family": "drift"},
}


def client_for(tmp_path: Path, **overrides: object) -> TestClient:
    settings = Settings(cache_dir=tmp_path / "cache", pool_workers=1, **overrides)
    return TestClient(create_app(settings))


@pytest.fixture(scope="module")
def client(tmp_path_factory: pytest.TempPathFactory) -> Iterator[TestClient]:
    with client_for(tmp_path_factory.mktemp("observe")) as c:
        yield c


def numbers(body: dict) -> str:
    kept = {k: body[k] for k in ("timestamps", "point", "intervals", "model")}
    kept["model"] = {k: v for k, v in kept["model"].items() if k != "fit_seconds"}
    return json.dumps(kept, sort_keys=True)


def test_second_request_is_a_byte_identical_hit(client: TestClient) -> None:
    body = {**BODY, "horizon": 5}
    first = client.post("/v1/forecasts", json=body)
    second = client.post("/v1/forecasts", json=body)
    assert first.status_code == second.status_code == 200, first.text
    assert first.headers["cache-status"] == (
        "windvane-fitted; fwd=miss; stored, windvane-response; fwd=miss; stored"
    )
    assert second.headers["cache-status"] == "windvane-response; hit; detail=memory"
    assert first.content.replace(b'"cache":"miss"', b'"cache":"hit"') == second.content
    assert first.json()["provenance"]["cache"] == "miss"
    assert second.json()["provenance"]["cache"] == "hit"
    a, b = first.json(), second.json()
    assert json.dumps(a["point"]) == json.dumps(b["point"])
    assert json.dumps(a["intervals"]) == json.dumps(b["intervals"])
    assert a["model"] == b["model"]  # fit_seconds included: the very same answer
    assert a["provenance"]["data_hash"] == b["provenance"]["data_hash"]


def test_another_horizon_is_another_entry(client: TestClient) -> None:
    client.post("/v1/forecasts", json={**BODY, "horizon": 6})
    other = client.post("/v1/forecasts", json={**BODY, "horizon": 7})
    assert other.json()["provenance"]["cache"] == "miss"
    assert len(other.json()["point"]) == 7


def test_cache_off_never_hits(tmp_path: Path) -> None:
    with client_for(tmp_path, cache="off") as c:
        c.post("/v1/forecasts", json=BODY)
        again = c.post("/v1/forecasts", json=BODY)
    assert again.headers["cache-status"] == "windvane-response; fwd=bypass"
    assert again.json()["provenance"]["cache"] == "off"
    assert not (tmp_path / "cache").exists()


def test_metrics_count_routes_by_template_and_cache_results(client: TestClient) -> None:
    client.post("/v1/forecasts", json={**BODY, "horizon": 3})
    client.post("/v1/forecasts", json={**BODY, "horizon": 3})
    client.get("/v1/no-such-route")
    text = client.get("/metrics").text
    assert 'windvane_requests_total{method="POST",route="/v1/forecasts",status="200"}' in text
    assert 'route="unmatched"' in text and "no-such-route" not in text
    assert 'windvane_cache_lookups_total{level="response",result="hit"}' in text
    assert 'windvane_fit_duration_seconds_count{family="drift"}' in text
    assert "windvane_series_length_count" in text
    assert "windvane_pool_workers 1.0" in text
    assert "windvane_build_info{" in text


@pytest.mark.skipif(
    shutil.which("promtool") is None,
    reason="promtool is not installed (Debian package 'prometheus'; .ci/run installs it)",
)
def test_promtool_accepts_the_metrics_endpoint(client: TestClient) -> None:
    client.post("/v1/forecasts", json=BODY)
    exposition = client.get("/metrics").content
    done = subprocess.run(
        ["promtool", "check", "metrics"], input=exposition, capture_output=True, timeout=30
    )
    assert done.returncode == 0, done.stdout.decode() + done.stderr.decode()


def test_one_log_line_per_request_without_values(tmp_path: Path) -> None:
    stream = io.StringIO()
    original = logs.request_logger
    with client_for(tmp_path) as c:
        # Point the app's request logger at our stream (same named logger).
        original(stream)
        c.post("/v1/forecasts", json=BODY, headers={"x-request-id": "req-42"})
    lines = [json.loads(line) for line in stream.getvalue().splitlines()]
    [line] = [x for x in lines if x.get("request_id") == "req-42"]
    assert line["route"] == "/v1/forecasts" and line["status"] == 200
    assert line["cache"] == "miss" and line["series_length"] == 10
    assert line["model"]
    text = stream.getvalue()
    assert "16.25" not in text and "north depot" not in text


def test_readyz_reports_pool_and_cache(client: TestClient) -> None:
    # The pool starts in the background: 503 while it warms up, then ready.
    deadline = time.monotonic() + 60
    while (found := client.get("/readyz")).status_code == 503 and time.monotonic() < deadline:
        assert found.json()["detail"] == "the worker pool is still starting up"
        time.sleep(0.1)
    ready = found.json()
    assert ready["status"] == "ready"
    assert ready["checks"] == {"pool": "ok", "cache": "ok"}
    assert ready["details"]["pool"]["workers"] == 1


def test_unwritable_cache_directory_degrades_and_still_answers(tmp_path: Path) -> None:
    # Tests run as root: a directory under a regular file cannot be created by anyone.
    blocker = tmp_path / "file"
    blocker.write_text("x")
    settings = Settings(cache_dir=blocker / "cache", pool_workers=1)
    with TestClient(create_app(settings)) as c:
        answer = c.post("/v1/forecasts", json=BODY)
        ready = c.get("/readyz").json()
    assert answer.status_code == 200
    assert ready["status"] == "ready" and ready["checks"]["cache"] == "degraded"
    assert "not usable" in ready["details"]["cache"]["degraded"]
    # An anonymous caller learns neither the path nor the operating system's error text.
    assert ready["details"]["cache"]["directory"] is None
    assert str(tmp_path) not in json.dumps(ready)
    assert (
        "Errno" not in json.dumps(ready)
        and "directory" not in ready["details"]["cache"]["degraded"]
    )


def test_readyz_shows_the_cache_directory_to_a_caller_with_a_key(tmp_path: Path) -> None:
    blocker = tmp_path / "file"
    blocker.write_text("x")
    settings = Settings(cache_dir=blocker / "cache", pool_workers=1, api_keys=key_digest("reader"))
    with TestClient(create_app(settings)) as c:
        # The first forecast waits for the pool, which starts in the background.
        c.post("/v1/forecasts", json=BODY, headers={"authorization": "Bearer reader"})
        anonymous = c.get("/readyz").json()
        keyed = c.get("/readyz", headers={"authorization": "Bearer reader"}).json()
    assert anonymous["details"]["cache"]["directory"] is None
    assert keyed["details"]["cache"]["directory"] == str(blocker / "cache")
    assert str(tmp_path) in keyed["details"]["cache"]["degraded"]


def test_budget_and_busy_map_to_503_problems(client: TestClient) -> None:
    pool = client.app.state.pool

    async def over_budget(*args: object, **kwargs: object) -> object:
        raise BudgetExceeded(0.5)

    async def busy(*args: object, **kwargs: object) -> object:
        raise PoolBusy(retry_after=3)

    original = pool.run
    try:
        pool.run = over_budget
        late = client.post("/v1/forecasts", json={**BODY, "horizon": 11})
        pool.run = busy
        full = client.post("/v1/forecasts", json={**BODY, "horizon": 12})
    finally:
        pool.run = original
    assert late.status_code == 503 and late.json()["code"] == "time_budget_exceeded"
    assert "0.5 s" in late.json()["detail"]
    assert late.headers["content-type"].startswith("application/problem+json")
    assert full.status_code == 503 and full.headers["retry-after"] == "3"
    text = client.get("/metrics").text
    assert 'windvane_fit_failures_total{family="drift",reason="budget"} 1.0' in text
    # The next request is served normally.
    assert client.post("/v1/forecasts", json={**BODY, "horizon": 13}).status_code == 200
