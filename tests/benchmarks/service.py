"""Service benchmark: Windvane over HTTP against a bare pydantic endpoint and in-process fits.

Run by hand: ``python -m tests.benchmarks.service [--quick] [--auto-only]``. Starts two
uvicorn servers on loopback (Windvane and a floor app that parses the same payload and returns
a fixed answer), drives both with an async httpx client bounded in count and time, and prints
ratios measured side by side in this run.

Last run (--auto-only, quiet machine): auto on 200 monthly points at h 24, first request to a
fresh server 0.706 s, median of 8 distinct requests 0.659 s, 1.03 x the same bodies in process.
"""

from __future__ import annotations

import argparse
import asyncio
import os
import platform
import socket
import subprocess
import sys
import tempfile
import time
from dataclasses import dataclass
from importlib.util import find_spec
from pathlib import Path
from typing import Any

import httpx
import numpy as np

from service.api.schemas.forecasts import ForecastRequest

ROOT = Path(__file__).resolve().parents[2]
CONNECTIONS = 16


def floor_app() -> Any:
    """The floor: parse a forecast request with the same pydantic schema, answer a constant."""
    from fastapi import FastAPI

    app = FastAPI()
    answer = {"point": [1.0, 2.0, 3.0], "cache": "hit"}

    @app.post("/v1/forecasts")
    async def forecast(body: ForecastRequest) -> dict[str, Any]:
        return answer

    @app.get("/healthz")
    async def healthz() -> dict[str, str]:
        return {"status": "ok"}

    return app


def body(n: int = 120, season: int = 12, salt: float = 0.0, family: str = "ets") -> dict[str, Any]:
    """A monthly seasonal series request; ``salt`` makes a distinct (cold) request."""
    rng = np.random.default_rng(7)
    t = np.arange(n)
    values = 100 + 0.5 * t + 10 * np.sin(2 * np.pi * t / season) + rng.normal(0, 2, n)
    values[-1] += salt
    model: dict[str, Any] = {"family": family}
    return {
        "series": {"start": "2010-01-01", "frequency": "MS", "values": values.round(6).tolist()},
        "horizon": 12,
        "coverage": [0.8, 0.95],
        "model": model,
    }


def auto_body(salt: float = 0.0) -> dict[str, Any]:
    """Model auto on selection_speed's 200-point monthly series at h = 24 (the issue's case)."""
    from tests.benchmarks.selection_speed import HORIZON, series

    values = series().to_numpy(dtype=float, copy=True)
    values[-1] += salt
    return {
        "series": {"start": "2008-01-01", "frequency": "MS", "values": values.round(6).tolist()},
        "horizon": HORIZON,
        "coverage": [0.8, 0.95],
        "model": "auto",
    }


@dataclass(frozen=True)
class Load:
    """The outcome of one load run."""

    requests: int
    seconds: float
    p50_ms: float
    p99_ms: float
    errors: int

    @property
    def rate(self) -> float:
        """Requests per second."""
        return self.requests / self.seconds


async def drive(
    url: str, payloads: list[dict[str, Any]] | None, count: int, connections: int, limit_s: float
) -> Load:
    """``count`` requests over ``connections`` connections (GET when no payloads)."""
    latencies: list[float] = []
    errors = 0
    issued = 0
    deadline = time.perf_counter() + limit_s
    limits = httpx.Limits(max_connections=connections, max_keepalive_connections=connections)
    async with httpx.AsyncClient(limits=limits, timeout=60) as client:

        async def one_connection() -> None:
            nonlocal issued, errors
            while issued < count and time.perf_counter() < deadline:
                i = issued
                issued += 1
                start = time.perf_counter()
                if payloads is None:
                    r = await client.get(url)
                else:
                    r = await client.post(url, json=payloads[i % len(payloads)])
                latencies.append(time.perf_counter() - start)
                errors += r.status_code >= 400

        started = time.perf_counter()
        await asyncio.gather(*(one_connection() for _ in range(connections)))
        seconds = time.perf_counter() - started
    ms = np.array(latencies) * 1000
    p50, p99 = (float(v) for v in np.percentile(ms, [50, 99]))
    return Load(len(ms), seconds, p50, p99, errors)


def free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return int(s.getsockname()[1])


def start(target: str, env: dict[str, str]) -> tuple[subprocess.Popen[bytes], str]:
    """A uvicorn server on loopback with uvloop and httptools; waits until /healthz answers."""
    port = free_port()
    command = [sys.executable, "-m", "uvicorn", target, "--factory", "--host", "127.0.0.1"]
    command += ["--port", str(port), "--loop", "uvloop", "--http", "httptools"]
    command += ["--log-level", "warning", "--no-access-log"]
    process = subprocess.Popen(
        command, cwd=ROOT, env={**os.environ, **env}, stdout=subprocess.DEVNULL
    )
    base = f"http://127.0.0.1:{port}"
    for _ in range(300):
        try:
            if httpx.get(f"{base}/healthz", timeout=1).status_code == 200:
                return process, base
        except httpx.HTTPError:
            pass
        time.sleep(0.1)
    process.kill()
    raise RuntimeError(f"{target} did not start")


def resident_mb(root: int) -> dict[str, float]:
    """Resident memory of a process and of every descendant (pool workers), MB."""
    parents: dict[int, int] = {}
    for entry in Path("/proc").iterdir():
        if entry.name.isdigit():
            try:
                stat = (entry / "stat").read_text()
            except OSError:
                continue
            parents[int(entry.name)] = int(stat.rsplit(")", 1)[1].split()[1])
    family = [root]
    for pid in family:
        family.extend(p for p, parent in parents.items() if parent == pid)
    out = {}
    for pid in family:
        try:
            for line in Path(f"/proc/{pid}/status").read_text().splitlines():
                if line.startswith("VmRSS:"):
                    out["server" if pid == root else f"child {pid}"] = int(line.split()[1]) / 1024
        except OSError:
            continue
    return out


def in_process_seconds(payload: dict[str, Any], repeats: int) -> float:
    """Median seconds of the same parse + fit + forecast called directly, no HTTP."""
    from threadpoolctl import threadpool_limits

    from service.api.tasks import forecast_task
    from service.config import Settings
    from service.runtime import jobs

    times = []
    # The same bodies as cold_http_seconds (an ETS search's cost depends on the data), on one
    # BLAS thread as in the pool's workers; the first call warms imports up and is not timed.
    with threadpool_limits(1):
        warm = ForecastRequest.model_validate(body(salt=999.0))
        jobs.forecast(forecast_task(warm, Settings())[0])
        for i in range(repeats):
            request = ForecastRequest.model_validate({**payload, **body(salt=1.0 + i)})
            started = time.perf_counter()
            task, _ = forecast_task(request, Settings())
            jobs.forecast(task)
            times.append(time.perf_counter() - started)
    return float(np.median(times))


async def cold_http_seconds(base: str, repeats: int) -> float:
    """Median seconds of distinct (uncached) explicit-model forecasts, one at a time."""
    times = await cold_http_times(base, [body(salt=1.0 + i) for i in range(repeats)])
    return float(np.median(times))


async def cold_http_times(base: str, payloads: list[dict[str, Any]]) -> list[float]:
    """Seconds of each request, one at a time (distinct bodies, so none is a cache hit)."""
    times = []
    async with httpx.AsyncClient(timeout=120) as client:
        # The client's own first-call costs (its connection, TLS context set-up) are not the
        # server's: measured 0.28 s on the first request, outside the server's own timing.
        (await client.get(f"{base}/healthz")).raise_for_status()
        for payload in payloads:
            started = time.perf_counter()
            r = await client.post(f"{base}/v1/forecasts", json=payload)
            r.raise_for_status()
            times.append(time.perf_counter() - started)
    return times


def in_process_auto_seconds(repeats: int) -> float:
    """Median seconds of the same auto bodies through the worker's job, called directly."""
    from threadpoolctl import threadpool_limits

    from service.api.tasks import forecast_task
    from service.config import Settings
    from service.runtime import jobs

    times = []
    with threadpool_limits(1):
        jobs.forecast(forecast_task(ForecastRequest.model_validate(auto_body(-1.0)), Settings())[0])
        for i in range(repeats):
            request = ForecastRequest.model_validate(auto_body(salt=1.0 + i))
            started = time.perf_counter()
            jobs.forecast(forecast_task(request, Settings())[0])
            times.append(time.perf_counter() - started)
    return float(np.median(times))


async def healthz_while_busy(base: str, workers: int) -> Load:
    """/healthz latency while every pool worker runs a long fit."""
    long_body = [body(n=600, salt=5000.0 + i) for i in range(workers * 2)]
    async with httpx.AsyncClient(timeout=300) as client:
        fits = [
            asyncio.ensure_future(client.post(f"{base}/v1/forecasts", json=b)) for b in long_body
        ]
        await asyncio.sleep(0.3)
        probe = await drive(f"{base}/healthz", None, 300, 1, 30)
        busy_at_end = sum(not f.done() for f in fits)
        await asyncio.gather(*fits)
    print(f"  (long fits still running when the probe ended: {busy_at_end} of {len(fits)})")
    return probe


def row(name: str, load: Load) -> str:
    return (
        f"| {name:<24} | {load.requests:>6} | {load.rate:>8.0f} | {load.p50_ms:>7.2f} |"
        f" {load.p99_ms:>7.2f} | {load.errors:>4} |"
    )


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__)
    parser.add_argument("--quick", action="store_true", help="fewer requests (smoke run)")
    parser.add_argument("--auto-only", action="store_true", help="stop after the auto timing")
    args = parser.parse_args()
    count = 500 if args.quick else 3000
    memory_total = 2_000 if args.quick else 10_000
    workers = 2
    print(f"python {platform.python_version()}, cores seen: {os.cpu_count()}")
    print(
        f"uvloop installed: {find_spec('uvloop') is not None}; "
        f"httptools installed: {find_spec('httptools') is not None}; "
        "servers started with --loop uvloop --http httptools"
    )
    cache_dir = tempfile.mkdtemp(prefix="windvane-bench-")
    env = {
        "WINDVANE_POOL_WORKERS": str(workers),
        "WINDVANE_CACHE_DIR": cache_dir,
        "WINDVANE_QUEUE_SIZE": "64",
    }
    windvane, base = start("service.api.app:create_app", env)
    floor, floor_base = start("tests.benchmarks.service:floor_app", {})
    try:
        # First: model auto on the fresh server (its workers warmed at start, nothing cached).
        auto_repeats = 3 if args.quick else 8
        auto_times = asyncio.run(
            cold_http_times(base, [auto_body(salt=1.0 + i) for i in range(auto_repeats)])
        )
        auto_local = in_process_auto_seconds(auto_repeats)
        auto_median = float(np.median(auto_times))
        print(
            f"\nauto, 200 monthly points, h 24, fresh server: first request "
            f"{auto_times[0]:.3f} s, median of {auto_repeats} distinct {auto_median:.3f} s"
            f" (target <= 1 s cold); in process {auto_local:.3f} s, HTTP / in process "
            f"{auto_median / auto_local:.2f} x"
        )
        if args.auto_only:
            return

        hot = body()
        httpx.post(f"{base}/v1/forecasts", json=hot, timeout=120).raise_for_status()
        floor_load = asyncio.run(drive(f"{floor_base}/v1/forecasts", [hot], count, CONNECTIONS, 60))
        hit_load = asyncio.run(drive(f"{base}/v1/forecasts", [hot], count, CONNECTIONS, 60))
        print(
            f"\n| {'scenario':<24} | {'count':>6} | {'req/s':>8} | {'p50 ms':>7} | "
            f"{'p99 ms':>7} | {'err':>4} |"
        )
        print(f"|{'-' * 26}|{'-' * 8}|{'-' * 10}|{'-' * 9}|{'-' * 9}|{'-' * 6}|")
        print(row("floor (pydantic only)", floor_load))
        print(row("windvane cache hit", hit_load))
        print(
            f"\ncache hit / floor: throughput {hit_load.rate / floor_load.rate:.2f} x "
            f"(target >= 0.5), p99 {hit_load.p99_ms / floor_load.p99_ms:.2f} x (target <= 2)"
        )

        repeats = 5 if args.quick else 15
        http_s = asyncio.run(cold_http_seconds(base, repeats))
        local_s = in_process_seconds(hot, repeats)
        print(
            f"\ncold ETS forecast: HTTP median {http_s * 1000:.1f} ms, in process "
            f"{local_s * 1000:.1f} ms: ratio {http_s / local_s:.2f} x (target <= 1.15)"
        )

        probe = asyncio.run(healthz_while_busy(base, workers))
        print(
            f"/healthz with every worker busy: p50 {probe.p50_ms:.2f} ms, p99 "
            f"{probe.p99_ms:.2f} ms (target p99 < 50 ms)"
        )

        mixed = [hot, *[body(salt=9000.0 + i, family="naive") for i in range(50)]]
        asyncio.run(drive(f"{base}/v1/forecasts", mixed, 1_000, CONNECTIONS, 300))
        after_1k = resident_mb(windvane.pid)
        asyncio.run(drive(f"{base}/v1/forecasts", mixed, memory_total - 1_000, CONNECTIONS, 600))
        after_all = resident_mb(windvane.pid)
        print(f"\nresident memory, MB (after 1,000 | after {memory_total:,} mixed requests):")
        for name in after_1k:
            later = after_all.get(name, float("nan"))
            print(
                f"  {name:<14} {after_1k[name]:8.1f} | {later:8.1f}  "
                f"({later / after_1k[name]:.3f} x, target within 1.10)"
            )
        floor_mb = resident_mb(floor.pid)["server"]
        print(f"  floor server   {floor_mb:8.1f}")
    finally:
        for process in (windvane, floor):
            process.terminate()
            process.wait(timeout=30)


if __name__ == "__main__":
    main()
