"""Soak: minutes of mixed cold load on a live server, with a /healthz prober and memory samples.

    OPENBLAS_NUM_THREADS=1 python -m tests.benchmarks.soak            # 180 s, the issue's run
    OPENBLAS_NUM_THREADS=1 python -m tests.benchmarks.soak --seconds 30   # a smoke run

Starts `windvane serve` from this checkout with 2 HTTP processes (``WINDVANE_WORKERS``) of 2
pool workers each (``WINDVANE_POOL_WORKERS``), waits until it is ready, then drives it with
wrk and ``soak_load.lua``: every request a fresh seeded series (nothing is a cache hit),
mixing explicit models, ``auto``, diagnostics, backtests, CSV in and out, batches with one
wrong item, and bad inputs that must each get their own 4xx problem. Meanwhile a separate
process opens a new connection to /healthz every 50 ms, and the server's resident memory
(the server and all its children) and the load average are sampled every 3 s.

An error is any 5xx, connection error, timeout or answer other than the one intended. The
report: errors, /healthz p50/p99/max (beside the prober's own floor on the idle server),
RSS first/last/max with a least-squares slope and the rule that calls it flat, wrk's CPU
against the server's (wrk must not be the bottleneck), and the load average. Targets (issue
15): 0 errors, flat memory, /healthz p99 < 50 ms. Figures: tests/benchmarks/RESULTS.md.
"""

from __future__ import annotations

import argparse
import http.client
import multiprocessing
import os
import re
import resource
import subprocess
import tempfile
import threading
import time
from dataclasses import dataclass, field
from multiprocessing.connection import Connection
from pathlib import Path

import numpy as np

from tests.benchmarks.service import ROOT, cpu_seconds, free_port, load_text
from tests.live_server import descendants, serve_command

SCRIPT = Path(__file__).with_name("soak_load.lua")
PROBE_SECONDS = 0.05
SAMPLE_SECONDS = 3.0
# Memory is flat when the slope over the run after its first quarter (imports, caches
# filling) is below this share of the mean total per minute.
FLAT_SHARE_PER_MINUTE = 0.01


def probe(port: int, interval: float, out: Connection) -> None:
    """GET /healthz on a fresh connection every ``interval`` s until ``out`` says stop; then
    sends back the latencies in ms and the failures."""
    latencies: list[float] = []
    failures: list[str] = []
    next_at = time.perf_counter()
    while not out.poll():
        started = time.perf_counter()
        try:
            conn = http.client.HTTPConnection("127.0.0.1", port, timeout=10)
            conn.request("GET", "/healthz")
            answer = conn.getresponse()
            answer.read()
            conn.close()
            if answer.status != 200:
                failures.append(f"status {answer.status}")
        except (OSError, http.client.HTTPException) as exc:
            failures.append(f"{type(exc).__name__}: {exc}")
        latencies.append((time.perf_counter() - started) * 1000)
        next_at = max(next_at + interval, time.perf_counter())
        time.sleep(max(0.0, next_at - time.perf_counter()))
    out.send((latencies, failures))


def probe_for(port: int, seconds: float) -> tuple[list[float], list[str]]:
    """The prober on its own for ``seconds`` (its floor on an idle server)."""
    ours, theirs = multiprocessing.Pipe()
    worker = multiprocessing.get_context("fork").Process(
        target=probe, args=(port, PROBE_SECONDS, theirs)
    )
    worker.start()
    time.sleep(seconds)
    ours.send("stop")
    found: tuple[list[float], list[str]] = ours.recv()
    worker.join()
    return found


def memory_mb(root: int) -> tuple[float, int]:
    """Resident MB of ``root`` and every descendant, and how many processes that is."""
    total = 0.0
    family = descendants(root)
    for pid in family:
        try:
            for line in Path(f"/proc/{pid}/status").read_text().splitlines():
                if line.startswith("VmRSS:"):
                    total += int(line.split()[1]) / 1024
        except OSError:
            continue
    return total, len(family)


@dataclass
class Samples:
    """Memory and load samples taken every SAMPLE_SECONDS by a thread."""

    times: list[float] = field(default_factory=list)
    rss: list[float] = field(default_factory=list)
    processes: list[int] = field(default_factory=list)
    load: list[float] = field(default_factory=list)

    def take(self, root: int, started: float) -> None:
        rss, count = memory_mb(root)
        self.times.append(time.perf_counter() - started)
        self.rss.append(rss)
        self.processes.append(count)
        self.load.append(os.getloadavg()[0])


def sample_until(done: threading.Event, root: int, samples: Samples, started: float) -> None:
    while not done.wait(SAMPLE_SECONDS):
        samples.take(root, started)


def start_server(
    directory: Path, workers: int, pool_workers: int
) -> tuple[subprocess.Popen[bytes], int]:
    """`windvane serve` from this checkout; returns once /readyz said 200 ten times in a row
    on fresh connections (so both HTTP processes are likely ready)."""
    port = free_port()
    env = {k: v for k, v in os.environ.items() if not k.startswith("WINDVANE_")}
    env.update(
        {
            "PYTHONPATH": str(ROOT),
            "WINDVANE_PORT": str(port),
            "WINDVANE_WORKERS": str(workers),
            "WINDVANE_POOL_WORKERS": str(pool_workers),
            "WINDVANE_CACHE_DIR": str(directory / "cache"),
            "WINDVANE_METRICS_DIR": str(directory / "metrics"),
            "WINDVANE_LOG_LEVEL": "warning",
        }
    )
    log = (directory / "server.log").open("wb")
    process = subprocess.Popen(
        serve_command(), env=env, cwd=directory, stdout=log, stderr=subprocess.STDOUT
    )
    deadline = time.monotonic() + 180
    streak = 0
    while streak < 10:
        if time.monotonic() > deadline or process.poll() is not None:
            process.kill()
            raise RuntimeError(f"the server did not become ready; see {directory}/server.log")
        try:
            conn = http.client.HTTPConnection("127.0.0.1", port, timeout=5)
            conn.request("GET", "/readyz")
            streak = streak + 1 if conn.getresponse().status == 200 else 0
            conn.close()
        except (OSError, http.client.HTTPException):
            streak = 0
        time.sleep(0.1)
    return process, port


@dataclass(frozen=True)
class WrkResult:
    requests: int
    seconds: float
    p50_ms: float
    p99_ms: float
    max_ms: float
    transport_errors: int
    counts: dict[str, int]
    unexpected: list[str]
    cpu_seconds: float


def run_wrk(port: int, seconds: int, connections: int, seed: int) -> WrkResult:
    """wrk with one connection per thread (see soak_load.lua), and the CPU it used."""
    command = ["wrk", f"-t{connections}", f"-c{connections}", f"-d{seconds}s", "--timeout", "120s"]
    command += ["-s", str(SCRIPT), f"http://127.0.0.1:{port}"]
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    out = subprocess.run(
        command,
        env={**os.environ, "WINDVANE_SOAK_SEED": str(seed)},
        capture_output=True,
        text=True,
        timeout=seconds + 300,
        check=True,
    ).stdout
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    used = (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)
    found = re.search(r"^WRK" + r" (\d+)" * 9 + "$", out, re.MULTILINE)
    if found is None:
        raise RuntimeError(f"unexpected wrk output:\n{out}")
    requests, micros, p50, p99, peak, *errors = (int(v) for v in found.groups())
    counts: dict[str, int] = {}
    for key, n in re.findall(r"^COUNT (.+) (\d+)$", out, re.MULTILINE):
        counts[key] = counts.get(key, 0) + int(n)
    unexpected = re.findall(r"^UNEXPECTED (.*)$", out, re.MULTILINE)
    return WrkResult(
        requests,
        micros / 1e6,
        p50 / 1000,
        p99 / 1000,
        peak / 1000,
        sum(errors),
        counts,
        unexpected,
        used,
    )


def slope_per_minute(times: list[float], values: list[float]) -> float:
    """Least-squares slope of ``values`` against ``times`` (seconds), per minute."""
    if len(times) < 3:
        return float("nan")
    return float(np.polyfit(np.array(times), np.array(values), 1)[0] * 60)


def report(
    load: WrkResult,
    healthz: list[float],
    failures: list[str],
    floor: list[float],
    samples: Samples,
    server_cpu: float,
    log: Path,
    log_offset: int,
) -> bool:
    """Print the figures and the verdict on each target; True when all three are met."""
    print(
        f"\nload: {load.requests} requests in {load.seconds:.1f} s "
        f"({load.requests / load.seconds:.1f}/s), wrk latency p50 {load.p50_ms:.0f} ms, "
        f"p99 {load.p99_ms:.0f} ms, max {load.max_ms:.0f} ms"
    )
    by_kind: dict[str, dict[str, int]] = {}
    for key, n in load.counts.items():
        if key == "unexpected":
            continue
        kind, status = key.rsplit(" ", 1)
        by_kind.setdefault(kind, {})[status] = n
    for kind in sorted(by_kind):
        statuses = ", ".join(f"{s}: {n}" for s, n in sorted(by_kind[kind].items()))
        print(f"  {kind:36} {statuses}")
    server_errors = sum(
        n
        for k, n in load.counts.items()
        if k != "unexpected" and k.rsplit(" ", 1)[1].startswith("5")
    )
    unexpected = load.counts.get("unexpected", 0)
    errors = unexpected + load.transport_errors + len(failures)
    print(
        f"errors: {errors} (answers other than intended: {unexpected}, of which 5xx: "
        f"{server_errors}; connection errors and timeouts: {load.transport_errors}; "
        f"/healthz failures: {len(failures)})"
    )
    for text in load.unexpected + failures[:5]:
        print(f"  {text}")
    lines = log.read_bytes()[log_offset:].decode(errors="replace").splitlines()
    logged = sum('"level":"error"' in line or "Traceback" in line for line in lines)
    print(f"server log lines during the load at level error or with a traceback: {logged}")

    p50, p99 = (float(v) for v in np.percentile(healthz, [50, 99]))
    f50, f99 = (float(v) for v in np.percentile(floor, [50, 99]))
    print(
        f"/healthz under load: {len(healthz)} probes, p50 {p50:.1f} ms, p99 {p99:.1f} ms, "
        f"max {max(healthz):.1f} ms (target p99 < 50); the prober on the idle server: "
        f"p50 {f50:.1f} ms, p99 {f99:.1f} ms"
    )

    quarter = len(samples.times) // 4
    slope = slope_per_minute(samples.times[quarter:], samples.rss[quarter:])
    mean = float(np.mean(samples.rss[quarter:])) if samples.rss else float("nan")
    limit = FLAT_SHARE_PER_MINUTE * mean
    flat = bool(slope < limit)
    print(
        f"RSS of the server and its children ({samples.processes[0]}-{max(samples.processes)} "
        f"processes, every {SAMPLE_SECONDS:g} s): first {samples.rss[0]:.0f} MB, last "
        f"{samples.rss[-1]:.0f} MB, max {max(samples.rss):.0f} MB; slope after the first "
        f"quarter {slope:+.1f} MB/min; rule: flat when that slope is below "
        f"{FLAT_SHARE_PER_MINUTE:.0%} of the mean ({limit:.1f} MB/min): "
        f"{'flat' if flat else 'NOT flat'}"
    )
    print(
        f"CPU: wrk {load.cpu_seconds:.1f} s, the server and its children {server_cpu:.1f} s "
        f"(wrk is {load.cpu_seconds / max(server_cpu, 1e-9):.1%} of the server's)"
    )
    print(
        f"load average during the run: min {min(samples.load):.1f}, max "
        f"{max(samples.load):.1f}; at the end {load_text()}"
    )
    met = errors == 0 and flat and p99 < 50
    print(
        f"targets: 0 errors {'met' if errors == 0 else 'MISSED'}, flat memory "
        f"{'met' if flat else 'MISSED'}, /healthz p99 < 50 ms {'met' if p99 < 50 else 'MISSED'}"
    )
    return met


def main() -> None:
    parser = argparse.ArgumentParser(
        description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter
    )
    parser.add_argument("--seconds", type=int, default=180, help="length of the load (default 180)")
    parser.add_argument("--workers", type=int, default=2, help="HTTP processes (default 2)")
    parser.add_argument(
        "--pool-workers", type=int, default=2, help="pool workers per process (default 2)"
    )
    parser.add_argument(
        "--connections",
        type=int,
        default=4,
        help="concurrent requests, one wrk thread each (default 4)",
    )
    parser.add_argument("--seed", type=int, default=1, help="seed of the series drawn in Lua")
    args = parser.parse_args()
    directory = Path(tempfile.mkdtemp(prefix="windvane-soak-"))
    print(
        f"soak: {args.seconds} s, {args.workers} HTTP processes x {args.pool_workers} pool "
        f"workers, {args.connections} connections; {load_text()}; files in {directory}"
    )
    started = time.perf_counter()
    server, port = start_server(directory, args.workers, args.pool_workers)
    print(f"ready after {time.perf_counter() - started:.1f} s")
    try:
        floor, _ = probe_for(port, 5.0)
        samples = Samples()
        began = time.perf_counter()
        samples.take(server.pid, began)
        done = threading.Event()
        sampler = threading.Thread(target=sample_until, args=(done, server.pid, samples, began))
        sampler.start()
        ours, theirs = multiprocessing.Pipe()
        prober = multiprocessing.get_context("fork").Process(
            target=probe, args=(port, PROBE_SECONDS, theirs)
        )
        prober.start()
        cpu_before = cpu_seconds(server.pid)
        log_offset = (directory / "server.log").stat().st_size
        try:
            load = run_wrk(port, args.seconds, args.connections, args.seed)
        finally:
            ours.send("stop")
            healthz, failures = ours.recv()
            prober.join()
            done.set()
            sampler.join()
        samples.take(server.pid, began)
        server_cpu = cpu_seconds(server.pid) - cpu_before
    finally:
        server.terminate()
        try:
            server.wait(timeout=60)
        except subprocess.TimeoutExpired:
            server.kill()
    met = report(
        load, healthz, failures, floor, samples, server_cpu, directory / "server.log", log_offset
    )
    raise SystemExit(0 if met else 1)


if __name__ == "__main__":
    main()
