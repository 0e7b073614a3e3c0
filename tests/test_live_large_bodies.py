"""A large valid body does not hold the event loop: /healthz answers while it is decoded.

Against a live server, /healthz is probed every few milliseconds while a body near the size
limits is posted: a 100,000-point forecast with long numbers and timestamps, and a batch of
10,000 items (30 MB; the batch is then refused for its item count, so only its decoding
runs). The reference is the same work done in one call in this process (the whole-body
decode, and for the forecast the canonical JSON of its key too), which is how long the loop
was held before; the worst probe must stay under half of it, so the bound scales with the
machine's speed and load.
"""

from __future__ import annotations

import http.client
import json
import threading
import time
from collections.abc import Iterator

import pytest
from live_server import LiveServer, running

from service.runtime.keys import canonical_json

pytestmark = pytest.mark.slow

POINTS = 100_000
BATCH_ITEMS = 10_000


@pytest.fixture(scope="module")
def server(tmp_path_factory: pytest.TempPathFactory) -> Iterator[LiveServer]:
    with running(
        tmp_path_factory.mktemp("large"), max_body_bytes="9000000", max_batch_series="10"
    ) as live:
        yield live


def forecast_body(horizon: int) -> bytes:
    stamps = ",".join(
        f'"2000-01-{1 + i // 86400:02d}T{i // 3600 % 24:02d}:{i // 60 % 60:02d}:{i % 60:02d}'
        f'.123456789+00:00"'
        for i in range(POINTS)
    )
    values = ",".join(f"{100 + (i % 97) / 97:.40f}" for i in range(POINTS))
    return (
        f'{{"series": {{"timestamps": [{stamps}], "values": [{values}], "frequency": "PT1S"}},'
        f' "horizon": {horizon}, "model": "naive"}}'
    ).encode()


def batch_body() -> bytes:
    values = [round(100 + (i % 13) * 0.731, 4) for i in range(300)]
    items = [
        {
            "id": f"item{i}",
            "series": {"start": "2010-01-01", "frequency": "MS", "values": values},
            "horizon": 12,
            "model": "naive",
        }
        for i in range(BATCH_ITEMS)
    ]
    return json.dumps({"requests": items}).encode()


def worst_probe_while(server: LiveServer, path: str, body: bytes) -> tuple[float, int, bytes]:
    """Post ``body`` while /healthz is probed on fresh connections; the worst probe (s)."""
    host, port = server.url.removeprefix("http://").split(":")
    worst = 0.0
    stop = threading.Event()

    def probe() -> None:
        nonlocal worst
        while not stop.is_set():
            started = time.perf_counter()
            conn = http.client.HTTPConnection(host, int(port), timeout=30)
            conn.request("GET", "/healthz")
            assert conn.getresponse().status == 200
            conn.close()
            worst = max(worst, time.perf_counter() - started)
            time.sleep(0.002)

    prober = threading.Thread(target=probe)
    prober.start()
    try:
        conn = http.client.HTTPConnection(host, int(port), timeout=120)
        conn.request("POST", path, body=body, headers={"content-type": "application/json"})
        answer = conn.getresponse()
        status, text = answer.status, answer.read()
        conn.close()
    finally:
        stop.set()
        prober.join()
    return worst, status, text


def seconds(work: object) -> float:
    started = time.perf_counter()
    assert callable(work)
    work()
    return time.perf_counter() - started


def test_a_long_forecast_body_leaves_healthz_answering(server: LiveServer) -> None:
    body = forecast_body(7)
    reference = seconds(lambda: canonical_json(json.loads(body)))
    worst, status, text = worst_probe_while(server, "/v1/forecasts", body)
    assert status == 200, text[:300]
    assert len(json.loads(text)["point"]) == 7
    assert worst < reference / 2, f"/healthz waited {worst:.3f} s (reference {reference:.3f} s)"


def test_a_batch_of_ten_thousand_items_leaves_healthz_answering(server: LiveServer) -> None:
    body = batch_body()
    reference = seconds(lambda: json.loads(body))
    worst, status, text = worst_probe_while(server, "/v1/forecast-batches", body)
    assert status == 422, text[:300]
    assert json.loads(text)["errors"][0]["field"] == "requests"
    assert worst < reference / 2, f"/healthz waited {worst:.3f} s (reference {reference:.3f} s)"
