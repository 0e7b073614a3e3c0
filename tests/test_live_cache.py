"""Readiness and the shared cache against a real `windvane serve`: the port opens before the
pool is warm, a killed idle worker is replaced with no request, planted and damaged entries
are refused and recomputed, a read-only directory still serves, and a second server process
on the same directory answers a repeated `auto` request from disk."""

from __future__ import annotations

import os
import pickle
import re
import shutil
import signal
import subprocess
import time
from pathlib import Path
from typing import Any

import httpx
import numpy as np
import pytest
from live_server import LiveServer, process_stats, running

from service.runtime.sealed import Sealer

pytestmark = [pytest.mark.server, pytest.mark.slow]

SECRET = "live test secret"


def body(horizon: int, model: Any = "auto") -> dict[str, Any]:
    rng = np.random.default_rng(11)
    t = np.arange(60)
    values = 50 + 0.3 * t + 6 * np.sin(2 * np.pi * t / 12) + rng.normal(0, 1, t.size)
    return {
        "series": {"start": "2019-01-01", "frequency": "MS", "values": values.round(3).tolist()},
        "horizon": horizon,
        "coverage": [0.8],
        "model": model,
    }


ETS = {"family": "ets", "error": "add", "trend": "add", "season": "add"}


def until(condition: Any, seconds: float = 60.0) -> Any:
    deadline = time.monotonic() + seconds
    while time.monotonic() < deadline:
        found = condition()
        if found:
            return found
        time.sleep(0.05)
    raise AssertionError(f"not reached in {seconds} s")


def ready(server: LiveServer) -> httpx.Response:
    return httpx.get(server.url + "/readyz", timeout=10)


def lookups(server: LiveServer, level: str, result: str) -> float:
    text = httpx.get(server.url + "/metrics", timeout=10).text
    pattern = rf'^windvane_cache_lookups_total{{level="{level}",result="{result}"}} ([0-9.]+)$'
    found = re.search(pattern, text, re.M)
    return float(found.group(1)) if found else 0.0


def workers_of(server: LiveServer) -> set[int]:
    """The pool's worker processes: children of the fork server, the server's child."""
    stats = process_stats()
    children = {p for p, fields in stats.items() if int(fields[1]) == server.process.pid}
    return {p for p, fields in stats.items() if int(fields[1]) in children}


def test_the_port_opens_at_once_and_an_idle_worker_that_dies_is_replaced(
    tmp_path: Path,
) -> None:
    with running(tmp_path, pool_workers="1") as server:
        # /healthz answered (running() waited for it) while the pool was still warming up.
        first = ready(server)
        assert first.status_code in (200, 503)
        if first.status_code == 503:
            assert first.json()["detail"] == "the worker pool is still starting up"
        until(lambda: ready(server).status_code == 200)
        [worker] = until(workers_of(server).copy)
        os.kill(worker, signal.SIGKILL)
        # No request is sent: the pool notices the exit and forks a replacement by itself.
        healed = until(
            lambda: (
                (r := ready(server)).status_code == 200
                and r.json()["details"]["pool"]["recycled"] >= 1
                and r
            )
        )
        assert healed.json()["details"]["pool"]["alive"] == 1
        assert worker not in workers_of(server)
        answer = httpx.post(server.url + "/v1/forecasts", json=body(3, ETS), timeout=60)
        assert answer.status_code == 200


class Planted:
    """Unpickling this would create a file: the code a planted entry would run."""

    def __init__(self, marker: Path) -> None:
        self.marker = marker

    def __reduce__(self) -> tuple[Any, tuple[str]]:
        return (os.system, (f"touch {self.marker}",))


def entries(directory: Path) -> list[Path]:
    return sorted(directory.glob("*/*.entry"))


def test_planted_and_damaged_entries_are_refused_and_recomputed(tmp_path: Path) -> None:
    cache = tmp_path / "cache"
    marker = tmp_path / "planted-code-ran"
    with running(tmp_path, cache_secret=SECRET) as server:
        first = httpx.post(server.url + "/v1/forecasts", json=body(3, ETS), timeout=60)
        assert first.status_code == 200
        assert len(entries(cache)) == 2  # the response and the fitted model
        # Every entry replaced by one sealed under a guessed secret, carrying a payload
        # that would run a command if it were unpickled.
        for path in entries(cache):
            forged = Sealer(b"a guess").seal(path.stem, "pickle", pickle.dumps(Planted(marker)), {})
            path.write_bytes(forged)
        second = httpx.post(server.url + "/v1/forecasts", json=body(4, ETS), timeout=60)
        assert second.status_code == 200
        assert second.json()["point"][:3] == first.json()["point"]
        assert not marker.exists()
        assert lookups(server, "fitted", "error") == 1
        # Truncated entries: refused, deleted, recomputed; the store stays on.
        for path in entries(cache):
            path.write_bytes(path.read_bytes()[:40])
        third = httpx.post(server.url + "/v1/forecasts", json=body(5, ETS), timeout=60)
        assert third.status_code == 200
        assert lookups(server, "fitted", "error") == 2
        assert ready(server).json()["checks"]["cache"] == "ok"
        # The model was stored again: the next new horizon is a fitted-model hit.
        fourth = httpx.post(server.url + "/v1/forecasts", json=body(6, ETS), timeout=60)
        assert fourth.headers["cache-status"].startswith("windvane-fitted; hit")


def chattr(flag: str, directory: Path) -> None:
    """Make a directory tree read-only even for root (``+i``) or writable again (``-i``)."""
    if shutil.which("chattr") is None:
        pytest.skip("chattr is not available")
    made = subprocess.run(["chattr", "-R", flag, str(directory)], capture_output=True)
    if made.returncode != 0:
        pytest.skip(f"chattr {flag} is not supported here: {made.stderr.decode()[:200]}")


def test_a_second_server_answers_auto_from_disk_even_read_only(tmp_path: Path) -> None:
    shared = {"cache_secret": SECRET, "cache_retry_seconds": "1"}
    cache = tmp_path / "cache"
    for name in ("first", "second"):
        (tmp_path / name).mkdir()
    with running(tmp_path / "first", cache_dir=str(cache), **shared) as first:
        computed = httpx.post(first.url + "/v1/forecasts", json=body(6), timeout=120)
        assert computed.headers["cache-status"] == "windvane-response; fwd=miss; stored"
    chattr("+i", cache)
    try:
        with running(tmp_path / "second", cache_dir=str(cache), **shared) as second:
            again = httpx.post(second.url + "/v1/forecasts", json=body(6), timeout=120)
            assert again.headers["cache-status"] == "windvane-response; hit; detail=disk"
            assert again.json()["point"] == computed.json()["point"]
            # A new request is computed and answered though it cannot be stored.
            other = httpx.post(second.url + "/v1/forecasts", json=body(2, ETS), timeout=60)
            assert other.status_code == 200
            state = until(lambda: (r := ready(second)).status_code == 200 and r.json())
            assert state["checks"]["cache"] == "degraded"
            chattr("-i", cache)
            time.sleep(1.1)  # past the retry interval: the next write is tried and succeeds
            healed = httpx.post(second.url + "/v1/forecasts", json=body(4, ETS), timeout=60)
            assert healed.status_code == 200
            assert ready(second).json()["checks"]["cache"] == "ok"
    finally:
        chattr("-i", cache)
