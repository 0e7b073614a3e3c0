"""Against a live server: NDJSON batch lines arrive as items finish, and `windvane forecast
--url` sends its request to the running service."""

from __future__ import annotations

import json
import os
import time
from collections.abc import Iterator
from pathlib import Path

import httpx
import pytest
from live_server import LiveServer, running

from service import demo
from service.cli import main

ROOT = Path(__file__).resolve().parents[1]
pytestmark = pytest.mark.server
# The bound on the time to the first line of a streamed batch.
FIRST_LINE_SECONDS = 5.0


@pytest.fixture(scope="module")
def server(tmp_path_factory: pytest.TempPathFactory) -> Iterator[LiveServer]:
    # The checkout's code, whichever checkout the console script was installed from.
    with pytest.MonkeyPatch.context() as patch:
        patch.setenv("PYTHONPATH", str(ROOT))
        with running(tmp_path_factory.mktemp("stream"), pool_workers="1") as live:
            yield live


def test_ndjson_lines_arrive_before_the_batch_completes(server: LiveServer) -> None:
    quick = demo.request_body("orders", horizon=2) | {"model": {"family": "naive"}, "id": "quick"}
    slow = [demo.request_body("energy", horizon=h) | {"id": f"auto-{h}"} for h in (3, 4, 5)]
    started = time.perf_counter()
    arrivals: list[tuple[float, dict[str, object]]] = []
    with httpx.stream(
        "POST",
        server.url + "/v1/forecast-batches",
        json={"requests": [quick, *slow]},
        headers={"accept": "application/x-ndjson"},
        timeout=120,
    ) as response:
        assert response.status_code == 200
        for line in response.iter_lines():
            if line:
                arrivals.append((time.perf_counter() - started, json.loads(line)))
    first, last = arrivals[0][0], arrivals[-1][0]
    load = os.getloadavg()[0]
    print(f"time to the first NDJSON line {first:.2f} s, to the closing line {last:.2f} s "
          f"(load {load:.2f})")  # fmt: skip
    assert first < FIRST_LINE_SECONDS, f"first line after {first:.2f} s at load {load:.2f}"
    assert [a[1].get("id") for a in arrivals[:4]] == ["quick", "auto-3", "auto-4", "auto-5"]
    assert arrivals[-1][1]["succeeded"] == 4
    # One pool worker answers in request order: the first line came while the three
    # automatic selections behind it were still to run.
    assert first < arrivals[1][0] < last


def test_forecast_sends_the_request_to_a_running_service(
    server: LiveServer, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    body = demo.request_body("fuel", horizon=3) | {"model": {"family": "drift"}}
    path = tmp_path / "fuel.json"
    path.write_text(json.dumps(body), encoding="utf-8")
    assert main(["forecast", str(path), "--url", server.url]) == 0
    answer = json.loads(capsys.readouterr().out)
    assert answer["model"]["family"] == "drift" and len(answer["point"]) == 3
    body["horizon"] = 0
    path.write_text(json.dumps(body), encoding="utf-8")
    assert main(["forecast", str(path), "--url", server.url]) == 1
    problem = json.loads(capsys.readouterr().err)
    assert problem["status"] == 422 and problem["errors"][0]["field"] == "horizon"
