"""Service benchmark: Windvane over HTTP against a bare pydantic endpoint and in-process fits.

Run by hand: ``python -m tests.benchmarks.service [--quick] [--only hit|startup|scaling|auto]``.
Starts uvicorn servers on loopback (Windvane, and a floor app that parses the same body with
the same pydantic schema and answers a body of the same size) and drives the throughput
scenarios with wrk (Debian's package; ``apt-get install wrk``: a Python client capped the
floor near its own speed), one thread and 16 connections, in rounds that alternate floor and
service. Beside requests per second and latency it reports CPU seconds per request, read
from /proc for the server and all its descendants, and prints every ratio with the load
average. Cold timings (auto, explicit models, /healthz under load) use an httpx client, one
request at a time. Figures and the commands that produced them: tests/benchmarks/RESULTS.md.
"""

from __future__ import annotations

import argparse
import asyncio
import json
import os
import platform
import re
import shutil
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
from tests.live_server import descendants, process_stats

ROOT = Path(__file__).resolve().parents[2]
CONNECTIONS = 16


FLOOR_BODY = "WINDVANE_BENCH_FLOOR_BODY"


def floor_app() -> Any:
    """The floor: parse a forecast request with the same pydantic schema, answer bytes of the
    same size as the service's answer (read from the file named by WINDVANE_BENCH_FLOOR_BODY)."""
    from fastapi import FastAPI, Response

    app = FastAPI()
    path = os.environ.get(FLOOR_BODY)
    answer = Path(path).read_bytes() if path else b'{"point":[1.0,2.0,3.0]}'

    @app.post("/v1/forecasts")
    async def forecast(body: ForecastRequest) -> Response:
        return Response(answer, media_type="application/json")

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
    family = descendants(root)
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
    from service.api.tasks import forecast_task
    from service.config import Settings
    from service.runtime import jobs
    from service.runtime.workers import pin_threads

    times = []
    # The same bodies as cold_http_seconds (an ETS search's cost depends on the data), on one
    # BLAS thread as in the pool's workers; the first call warms imports up and is not timed.
    pin_threads()
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
    from service.api.tasks import forecast_task
    from service.config import Settings
    from service.runtime import jobs
    from service.runtime.workers import pin_threads

    times = []
    pin_threads()
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


WRK_SCRIPT = """
wrk.method = "POST"
wrk.headers["Content-Type"] = "application/json"
local f = assert(io.open(os.getenv("WINDVANE_BENCH_BODY"), "rb"))
wrk.body = f:read("*a")
f:close()
done = function(summary, latency, requests)
  local e = summary.errors
  io.write(string.format(
    "WRK %d %d %d %d %d %d\\n", summary.requests, summary.duration,
    latency:percentile(50), latency:percentile(99),
    e.connect + e.read + e.write + e.timeout, e.status))
end
"""


@dataclass(frozen=True)
class Round:
    """One wrk round against one server: throughput, latency, errors and CPU per request."""

    requests: int
    seconds: float
    p50_ms: float
    p99_ms: float
    errors: int
    cpu_seconds: float

    @property
    def rate(self) -> float:
        """Requests per second."""
        return self.requests / self.seconds

    @property
    def cpu_ms(self) -> float:
        """Server CPU milliseconds per request (the server and all its descendants)."""
        return 1000 * self.cpu_seconds / max(1, self.requests)


def cpu_seconds(root: int) -> float:
    """User + system CPU seconds of a process and every living descendant, from /proc."""
    tick = os.sysconf("SC_CLK_TCK")
    stats = process_stats()
    times = {pid: (int(f[11]) + int(f[12])) / tick for pid, f in stats.items()}
    family = descendants(root, stats)
    return sum(times.get(pid, 0.0) for pid in family)


def wrk_round(url: str, body_file: Path, pid: int, seconds: int, connections: int) -> Round:
    """wrk, one thread, ``connections`` connections, for ``seconds`` against ``url``."""
    with tempfile.NamedTemporaryFile("w", suffix=".lua", delete=False) as script:
        script.write(WRK_SCRIPT)
    command = ["wrk", "-t1", f"-c{connections}", f"-d{seconds}s", "-s", script.name, url]
    before = cpu_seconds(pid)
    out = subprocess.run(
        command,
        env={**os.environ, "WINDVANE_BENCH_BODY": str(body_file)},
        capture_output=True,
        text=True,
        timeout=seconds + 60,
        check=True,
    ).stdout
    used = cpu_seconds(pid) - before
    os.unlink(script.name)
    found = re.search(r"^WRK (\d+) (\d+) (\d+) (\d+) (\d+) (\d+)$", out, re.MULTILINE)
    if found is None:
        raise RuntimeError(f"unexpected wrk output:\n{out}")
    requests, micros, p50, p99, errors, status = (int(v) for v in found.groups())
    return Round(requests, micros / 1e6, p50 / 1000, p99 / 1000, errors + status, used)


def median_round(rounds: list[Round]) -> Round:
    """Per-field medians over rounds (requests and seconds summed, so the rate is the mean)."""
    return Round(
        sum(r.requests for r in rounds),
        sum(r.seconds for r in rounds),
        float(np.median([r.p50_ms for r in rounds])),
        float(np.median([r.p99_ms for r in rounds])),
        sum(r.errors for r in rounds),
        sum(r.cpu_seconds for r in rounds),
    )


def load_text() -> str:
    """The 1, 5 and 15 minute load averages, to print beside every figure."""
    return "load average " + " ".join(f"{v:.2f}" for v in os.getloadavg())


def hit_rounds(quick: bool) -> None:
    """The cache hit against the floor: interleaved wrk rounds, ratios and targets."""
    if shutil.which("wrk") is None:
        raise SystemExit("wrk is needed: apt-get install -y wrk")
    directory = Path(tempfile.mkdtemp(prefix="windvane-bench-"))
    hot = body(n=200)
    body_file = directory / "request.json"
    body_file.write_text(json.dumps(hot))
    windvane, base = start(
        "service.api.app:create_app",
        {"WINDVANE_CACHE_DIR": str(directory / "cache"), "WINDVANE_LOG_LEVEL": "warning"},
    )
    try:
        first = httpx.post(f"{base}/v1/forecasts", json=hot, timeout=120)
        first.raise_for_status()
        answer = httpx.post(f"{base}/v1/forecasts", json=hot, timeout=120)
        (directory / "answer.json").write_bytes(answer.content)
        floor, floor_base = start(
            "tests.benchmarks.service:floor_app", {FLOOR_BODY: str(directory / "answer.json")}
        )
        try:
            check = httpx.post(f"{floor_base}/v1/forecasts", json=hot, timeout=30)
            print(
                f"body sent {body_file.stat().st_size} B; answers: service "
                f"{len(answer.content)} B ({answer.headers['cache-status']}), floor "
                f"{len(check.content)} B"
            )
            seconds, rounds = (3, 3) if quick else (5, 5)
            floors, hits = [], []
            for _ in range(rounds):
                floors.append(
                    wrk_round(f"{floor_base}/v1/forecasts", body_file, floor.pid, seconds, 16)
                )
                hits.append(wrk_round(f"{base}/v1/forecasts", body_file, windvane.pid, seconds, 16))
                print(
                    f"  round: floor {floors[-1].rate:7.0f} req/s, hit {hits[-1].rate:7.0f} "
                    f"req/s ({load_text()})"
                )
        finally:
            floor.terminate()
            floor.wait(timeout=30)
    finally:
        windvane.terminate()
        windvane.wait(timeout=30)
    f, h = median_round(floors), median_round(hits)
    print(
        f"\n| {'wrk -t1 -c16':<22} | {'req/s':>7} | {'p50 ms':>7} | {'p99 ms':>7} |"
        f" {'CPU ms/req':>10} | {'errors':>6} |"
    )
    print(f"|{'-' * 24}|{'-' * 9}|{'-' * 9}|{'-' * 9}|{'-' * 12}|{'-' * 8}|")
    for name, r in (("floor (pydantic only)", f), ("windvane cache hit", h)):
        print(
            f"| {name:<22} | {r.rate:7.0f} | {r.p50_ms:7.2f} | {r.p99_ms:7.2f} |"
            f" {r.cpu_ms:10.3f} | {r.errors:6d} |"
        )
    # Ratios of each round with the floor round just before it, then their median: a burst
    # of load from elsewhere on the machine then spoils one pair, not the summary.
    pairs = list(zip(floors, hits, strict=True))
    rate = float(np.median([b.rate / a.rate for a, b in pairs]))
    cpu = float(np.median([b.cpu_ms / a.cpu_ms for a, b in pairs]))
    p99 = float(np.median([b.p99_ms / a.p99_ms for a, b in pairs]))
    print(
        f"\ncache hit / floor, median of {len(pairs)} paired rounds: req/s {rate:.2f} x "
        f"(target >= 0.8), CPU per request {cpu:.2f} x (target <= 1.5), p99 {p99:.2f} x "
        f"(target <= 2); {load_text()}"
    )


def batch_seconds(base: str, count: int, salt: float) -> float:
    """Seconds for one batch of ``count`` distinct explicit ETS forecasts (nothing cached)."""
    requests = [body(n=144, salt=salt + i) for i in range(count)]
    started = time.perf_counter()
    r = httpx.post(f"{base}/v1/forecast-batches", json={"requests": requests}, timeout=600)
    r.raise_for_status()
    return time.perf_counter() - started


def pool_scaling(quick: bool) -> None:
    """Throughput of 2 pool workers against 1 on the same batches, servers side by side."""
    count = 8 if quick else 16
    servers = {}
    try:
        for workers in (1, 2):
            servers[workers] = start(
                "service.api.app:create_app",
                {
                    "WINDVANE_POOL_WORKERS": str(workers),
                    "WINDVANE_CACHE": "off",
                    "WINDVANE_LOG_LEVEL": "warning",
                },
            )
            wait_ready(servers[workers][1])
        times: dict[int, list[float]] = {1: [], 2: []}
        for repeat in range(2 if quick else 3):
            for workers in (1, 2):
                times[workers].append(batch_seconds(servers[workers][1], count, 100.0 * repeat))
        one, two = (float(np.median(times[w])) for w in (1, 2))
        print(
            f"\nbatch of {count} distinct ETS forecasts (144 monthly points): 1 pool worker "
            f"{one:.2f} s, 2 workers {two:.2f} s: throughput {one / two:.2f} x "
            f"(target >= 1.7 with two free cores); cores seen {os.cpu_count()}; {load_text()}"
        )
    finally:
        for process, _ in servers.values():
            process.terminate()
            process.wait(timeout=30)


def wait_ready(base: str, seconds: float = 120.0) -> None:
    """Poll /readyz until the pool is warm."""
    deadline = time.monotonic() + seconds
    while time.monotonic() < deadline:
        if httpx.get(f"{base}/readyz", timeout=5).status_code == 200:
            return
        time.sleep(0.1)
    raise RuntimeError(f"{base} not ready after {seconds} s")


def cold_scenarios(quick: bool, auto_only: bool) -> None:
    """Auto on a fresh server, explicit models against in process, /healthz under load, memory."""
    count_total = 2_000 if quick else 10_000
    workers = 2
    cache_dir = tempfile.mkdtemp(prefix="windvane-bench-")
    env = {
        "WINDVANE_POOL_WORKERS": str(workers),
        "WINDVANE_CACHE_DIR": cache_dir,
        "WINDVANE_QUEUE_SIZE": "64",
        "WINDVANE_LOG_LEVEL": "warning",
    }
    windvane, base = start("service.api.app:create_app", env)
    try:
        # First: model auto on the fresh server (its workers warmed at start, nothing cached).
        wait_ready(base)
        auto_repeats = 3 if quick else 8
        auto_times = asyncio.run(
            cold_http_times(base, [auto_body(salt=1.0 + i) for i in range(auto_repeats)])
        )
        auto_local = in_process_auto_seconds(auto_repeats)
        auto_median = float(np.median(auto_times))
        print(
            f"\nauto, 200 monthly points, h 24, fresh server: first request "
            f"{auto_times[0]:.3f} s, median of {auto_repeats} distinct {auto_median:.3f} s"
            f" (target <= 1 s cold); in process {auto_local:.3f} s, HTTP / in process "
            f"{auto_median / auto_local:.2f} x; {load_text()}"
        )
        if auto_only:
            return

        hot = body()
        repeats = 5 if quick else 15
        http_s = asyncio.run(cold_http_seconds(base, repeats))
        local_s = in_process_seconds(hot, repeats)
        print(
            f"\ncold ETS forecast: HTTP median {http_s * 1000:.1f} ms, in process "
            f"{local_s * 1000:.1f} ms: ratio {http_s / local_s:.2f} x (target <= 1.15); "
            f"{load_text()}"
        )

        probe = asyncio.run(healthz_while_busy(base, workers))
        print(
            f"/healthz with every worker busy: p50 {probe.p50_ms:.2f} ms, p99 "
            f"{probe.p99_ms:.2f} ms (target p99 < 50 ms)"
        )

        mixed = [hot, *[body(salt=9000.0 + i, family="naive") for i in range(50)]]
        asyncio.run(drive(f"{base}/v1/forecasts", mixed, 1_000, CONNECTIONS, 300))
        after_1k = resident_mb(windvane.pid)
        asyncio.run(drive(f"{base}/v1/forecasts", mixed, count_total - 1_000, CONNECTIONS, 600))
        after_all = resident_mb(windvane.pid)
        print(f"\nresident memory, MB (after 1,000 | after {count_total:,} mixed requests):")
        for name in after_1k:
            later = after_all.get(name, float("nan"))
            print(
                f"  {name:<14} {after_1k[name]:8.1f} | {later:8.1f}  "
                f"({later / after_1k[name]:.3f} x, target within 1.10)"
            )
    finally:
        windvane.terminate()
        windvane.wait(timeout=30)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__)
    parser.add_argument("--quick", action="store_true", help="shorter rounds (smoke run)")
    parser.add_argument(
        "--only",
        choices=("hit", "startup", "scaling", "auto", "cold"),
        help="run one scenario: the cache hit against the floor, the start-up timeline, "
        "pool scaling on a batch, auto on a fresh server, or every cold timing",
    )
    parser.add_argument("--auto-only", action="store_true", help="the same as --only auto")
    args = parser.parse_args()
    only = "auto" if args.auto_only else args.only
    print(f"python {platform.python_version()}, cores seen: {os.cpu_count()}; {load_text()}")
    print(
        f"uvloop installed: {find_spec('uvloop') is not None}; "
        f"httptools installed: {find_spec('httptools') is not None}; "
        "servers started with --loop uvloop --http httptools --no-access-log"
    )
    if only in (None, "startup"):
        from tests.benchmarks.startup import run

        run(rounds=1)
    if only in (None, "hit"):
        hit_rounds(args.quick)
    if only in (None, "scaling"):
        pool_scaling(args.quick)
    if only in (None, "auto", "cold"):
        cold_scenarios(args.quick, auto_only=only == "auto")


if __name__ == "__main__":
    main()
