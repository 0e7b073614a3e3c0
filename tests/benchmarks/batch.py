"""Batch throughput: series per second with 1 and 2 loky workers and on a 2-worker Dask
LocalCluster, resident memory per worker over the run, and the time to the first NDJSON line
of POST /v1/forecast-batches on a live server; all in one run, printed as ratios.

    python -m tests.benchmarks.batch               # 60 series (a few minutes on 2 cores)
    python -m tests.benchmarks.batch --series 2000 # the issue's size

Seeded 120-point monthly series, `auto`, horizon 12, cache off (every series is computed).
"""

from __future__ import annotations

import argparse
import json
import os
import statistics
import sys
import tempfile
import time
from collections import defaultdict
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from service.api.batch_items import answer_entry
from service.config import Settings
from service.runtime.fanout import fan_out

HORIZON = 12


def requests(count: int, points: int, seed: int = 2026) -> list[dict[str, Any]]:
    """Seeded monthly series: level, trend, a season of varying strength, noise."""
    rng = np.random.default_rng(seed)
    start = pd.Timestamp("2010-01-01")
    t = np.arange(points)
    out = []
    for k in range(count):
        season = rng.uniform(0, 15) * np.sin(2 * np.pi * t / 12 + rng.uniform(0, 6))
        walk = np.cumsum(rng.normal(0, rng.uniform(0.5, 3), points))
        values = 200 + rng.uniform(-0.5, 1.0) * t + season + walk
        out.append(
            {
                "id": f"series-{k}",
                "series": {"start": start.strftime("%Y-%m-%d"), "frequency": "MS",
                           "values": [round(float(v), 3) for v in values]},
                "horizon": HORIZON,
            }
        )  # fmt: skip
    return out


def measured(raw: dict[str, Any], index: int, settings: Settings) -> tuple[int, int, int]:
    """The batch job, plus which process ran it and its resident memory afterwards."""
    import psutil

    found = answer_entry(raw, index, settings)
    return found["status"], os.getpid(), int(psutil.Process().memory_info().rss)


def timed_run(
    items: list[dict[str, Any]], settings: Settings, **where: Any
) -> tuple[float, dict[int, list[int]], int]:
    """Seconds for the whole run, resident bytes per worker in completion order, failures."""
    memory: dict[int, list[int]] = defaultdict(list)
    failed = 0
    started = time.perf_counter()
    jobs = ((raw, i, settings) for i, raw in enumerate(items))
    for status, pid, rss in fan_out(measured, jobs, **where):
        memory[pid].append(rss)
        failed += status != 200
    return time.perf_counter() - started, memory, failed


def growth(memory: dict[int, list[int]]) -> str:
    """Per worker: median RSS of its last quarter of jobs over its first quarter."""
    parts = []
    for samples in memory.values():
        if len(samples) < 8:
            continue
        q = len(samples) // 4
        first, last = statistics.median(samples[:q]), statistics.median(samples[-q:])
        parts.append(f"{first / 1e6:.0f}->{last / 1e6:.0f} MB ({last / first:.2f}x)")
    return ", ".join(parts) or "too few jobs per worker to tell"


def first_line_seconds(items: list[dict[str, Any]]) -> tuple[float, float]:
    """A live server with 2 pool workers: seconds to the first NDJSON line and to the last."""
    import httpx

    sys.path.insert(0, str(Path(__file__).resolve().parents[1]))
    from live_server import running

    os.environ["PYTHONPATH"] = str(Path(__file__).resolve().parents[2])
    with tempfile.TemporaryDirectory() as directory:
        with running(Path(directory), pool_workers="2", cache="off") as server:
            started = time.perf_counter()
            first = last = 0.0
            with httpx.stream(
                "POST",
                server.url + "/v1/forecast-batches",
                json={"requests": items},
                headers={"accept": "application/x-ndjson"},
                timeout=3600,
            ) as response:
                for line in response.iter_lines():
                    if not line:
                        continue
                    last = time.perf_counter() - started
                    first = first or last
                    json.loads(line)
    return first, last


def cluster(workers: int) -> Iterator[str]:
    """A LocalCluster of single-threaded worker processes (the scheduler's address)."""
    from distributed import LocalCluster

    with LocalCluster(
        n_workers=workers, threads_per_worker=1, processes=True, dashboard_address=":0"
    ) as local:
        yield str(local.scheduler_address)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__)
    parser.add_argument("--series", type=int, default=60)
    parser.add_argument("--points", type=int, default=120)
    parser.add_argument("--stream-series", type=int, default=40)
    args = parser.parse_args()
    items = requests(args.series, args.points)
    settings = Settings(cache="off")
    cores = len(os.sched_getaffinity(0)) if hasattr(os, "sched_getaffinity") else os.cpu_count()
    print(f"{args.series} series x {args.points} points, auto, horizon {HORIZON}; cores seen "
          f"{cores}; load average {os.getloadavg()[0]:.2f}")  # fmt: skip
    rates: dict[str, float] = {}
    for name, where in (("local 1 worker", {"workers": 1}), ("local 2 workers", {"workers": 2})):
        seconds, memory, failed = timed_run(items, settings, **where)
        rates[name] = args.series / seconds
        print(f"{name}: {seconds:.1f} s, {rates[name]:.2f} series/s, {failed} failed; "
              f"memory per worker {growth(memory)}; load {os.getloadavg()[0]:.2f}")  # fmt: skip
    for address in cluster(2):
        seconds, memory, failed = timed_run(items, settings, scheduler=address)
        rates["cluster"] = args.series / seconds
        print(f"LocalCluster 2 workers: {seconds:.1f} s, {rates['cluster']:.2f} series/s, "
              f"{failed} failed; memory per worker {growth(memory)}; "
              f"load {os.getloadavg()[0]:.2f}")  # fmt: skip
    efficiency = rates["local 2 workers"] / rates["local 1 worker"]
    per_worker = rates["cluster"] / rates["local 2 workers"]
    print(f"scaling 2/1 local workers: {efficiency:.2f} (target >= 1.7 with two free cores)")
    print(f"LocalCluster / local, per worker: {per_worker:.2f} (target within 0.8-1.2)")
    first, last = first_line_seconds(items[: args.stream_series])
    print(f"NDJSON over HTTP, {args.stream_series} series, 2 pool workers: first line "
          f"{first:.2f} s (target < 5 s), last line {last:.1f} s; "
          f"load {os.getloadavg()[0]:.2f}")  # fmt: skip


if __name__ == "__main__":
    main()
