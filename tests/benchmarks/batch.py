"""Batch throughput: series per second with 1 and 2 loky workers and on a 2-worker Dask
LocalCluster, resident memory per worker over the run, and the time to the first NDJSON line
of POST /v1/forecast-batches on a live server; printed as ratios with the load average.

    python -m tests.benchmarks.batch                  # 40 series, every configuration
    python -m tests.benchmarks.batch --series 2000    # the issue's size
    python -m tests.benchmarks.batch --series 20 --only local1,local2
    python -m tests.benchmarks.batch --series 60 --only local1,local2 --rounds 3   # A/B
    python -m tests.benchmarks.batch --only coupling    # how much the cores slow each other

Seeded 120-point monthly series, `auto`, horizon 12, cache off (every series is computed).
Each configuration first starts its workers and imports the job's modules in all of them
at once (`warm_up`, timed as "start-up", with the LocalCluster's own start); "run" is the
series from then on, so the 2/1 scaling compares the work and the start-up is a figure of
its own (the end-to-end rates include it). Resident memory is sampled per worker every
--sample-seconds by a thread of this process (psutil), and the rule is printed with the
verdict. Per worker it prints the CPU seconds per series inside the job and the process's
CPU outside it (the pool's own work), the share of the run spent in a job, and, per
configuration, the CPU other processes of the machine used meanwhile (/proc/stat), so a run
on a busy machine says so. `--rounds` repeats local1 and local2 interleaved and prints the
2/1 ratios per round; `coupling` measures a series' CPU alone and beside a plain loop on the
other core, the part of the 2/1 loss no code of ours can remove. The CPU seconds per series
project the duration of a larger run on an idle machine.
"""

from __future__ import annotations

import argparse
import importlib
import json
import os
import statistics
import sys
import tempfile
import time
from collections.abc import Iterator
from contextlib import contextmanager
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from service.api.batch_items import answer_entry
from service.config import Settings
from service.runtime.fanout import CONNECT_SECONDS, WORKER_SETTINGS, fan_out, local_pool
from tests.benchmarks.batch_probes import Job, Sampler, coupling, memory_verdict, worker_lines

__all__ = ["main", "memory_verdict", "requests"]

HORIZON = 12
CONFIGURATIONS = ("local1", "local2", "cluster", "stream", "coupling")
# Every loky worker's warm-up call lasts at least this long, so no worker takes two of them
# while another is still starting.
WARM_HOLD_SECONDS = 0.5


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


def long_table(items: list[dict[str, Any]]) -> pd.DataFrame:
    """The same series as a long table (series_id, timestamp, value) for `windvane batch`."""
    frames = []
    for item in items:
        series = item["series"]
        stamps = pd.date_range(series["start"], periods=len(series["values"]), freq="MS")
        frames.append(
            pd.DataFrame(
                {
                    "series_id": item["id"],
                    "timestamp": stamps.strftime("%Y-%m-%d"),
                    "value": series["values"],
                }
            )
        )
    return pd.concat(frames, ignore_index=True)


def measured(raw: dict[str, Any], index: int, settings: Settings) -> Job:
    """The batch job, with the CPU seconds it took, the process that ran it and when."""
    start, started = time.monotonic(), time.process_time()
    found = answer_entry(raw, index, settings)
    cpu = time.process_time() - started
    return Job(found["status"], cpu, os.getpid(), start, time.monotonic())


def warm_up(workers: int, scheduler: str | None, sample: dict[str, Any]) -> list[int]:
    """Start the worker processes, import this module (the whole statistics stack) and answer
    ``sample`` once in every one at once (the first fit's lazy imports and the collector's
    settling are start-up too); their process ids (this process's own for one local worker)."""
    if scheduler:
        from distributed import Client

        with Client(scheduler, timeout=CONNECT_SECONDS) as client:
            return sorted(int(pid) for pid in client.run(imported, 0.0, sample).values())
    if workers <= 1:
        return [imported(0.0, sample)]
    from joblib import Parallel, delayed

    seen: set[int] = set()
    for _ in range(3):  # one call per worker; a worker that took two left another cold
        with local_pool(workers):
            seen.update(Parallel(batch_size=1)(
                delayed(imported)(WARM_HOLD_SECONDS, sample) for _ in range(workers)))  # fmt: skip
        if len(seen) >= workers:
            break
    return sorted(seen)


def imported(hold: float, sample: dict[str, Any] | None = None) -> int:
    """In a worker: BLAS pinned, the batch job's modules imported, ``sample`` answered."""
    from service.runtime.workers import pin_threads

    started = time.perf_counter()
    pin_threads()
    importlib.import_module(answer_entry.__module__)
    if sample is not None:
        answer_entry(sample, 0, Settings(cache="off"))
    time.sleep(max(0.0, hold - (time.perf_counter() - started)))
    return os.getpid()


@dataclass
class Measured:
    """One configuration's figures."""

    name: str
    workers: int
    startup: float
    seconds: float
    cpu: float
    series: int
    failed: int
    memory: str = field(default="")
    others: float = field(default=0.0)

    @property
    def rate(self) -> float:
        return self.series / self.seconds

    @property
    def end_to_end(self) -> float:
        return self.series / (self.startup + self.seconds)


def measure(
    name: str,
    items: list[dict[str, Any]],
    every: float,
    workers: int,
    scheduler: str | None = None,
    before: float = 0.0,
) -> Measured:
    """Start and warm the workers, then time every series through ``fan_out``; ``before``:
    seconds of start-up already spent (the LocalCluster's)."""
    settings = Settings(cache="off")
    started = time.perf_counter()
    pids = warm_up(workers, scheduler, items[0])
    startup = before + time.perf_counter() - started
    sampler = Sampler(pids, every)
    sampler.start()
    jobs = ((raw, i, settings) for i, raw in enumerate(items))
    begin, own, at_start = time.monotonic(), time.process_time(), load()
    done: list[Job] = list(fan_out(measured, jobs, workers=workers, scheduler=scheduler))
    end, own = time.monotonic(), time.process_time() - own
    ran = {job.pid for job in done}
    if not ran <= set(pids):  # the memory samples would be of idle processes
        raise SystemExit(f"{name}: the series ran in {sorted(ran)}, not the started {pids}")
    sampler.stop()
    cpu = sum(job.cpu for job in done)
    failed = sum(job.status != 200 for job in done)
    parent = (
        ""
        if pids == [os.getpid()]
        else (f"; this process (the parent) {own:.1f} CPU-s, {own / cpu:.1%} of the workers'")
    )
    found = Measured(name, len(pids), startup, end - begin, cpu, len(items), failed)
    found.memory = memory_verdict(sampler.samples, begin, end)
    found.others = sampler.others
    per_worker = "\n".join(worker_lines(done, sampler, begin, end))
    print(
        f"{name}: start-up {startup:.1f} s ({len(pids)} worker(s)); {len(items)} series in "
        f"{found.seconds:.1f} s = {found.rate:.2f} series/s ({found.end_to_end:.2f} with the "
        f"start-up), CPU {cpu / len(items):.3f} s and wall {found.seconds / len(items):.3f} s "
        f"per series, {failed} failed{parent}; load {at_start} -> {load()}, other processes "
        f"{found.others:.2f} cores on average\n{per_worker}\n"
        f"  memory per worker: {found.memory}",
        flush=True,
    )
    return found


@contextmanager
def cluster(workers: int) -> Iterator[tuple[str, float]]:
    """A LocalCluster of single-threaded worker processes, set up as the batch job's workers
    should be (WORKER_SETTINGS): its address, seconds to start."""
    import dask
    from distributed import LocalCluster

    started = time.perf_counter()
    with (
        dask.config.set(WORKER_SETTINGS),
        LocalCluster(
            n_workers=workers,
            threads_per_worker=1,
            processes=True,
            dashboard_address=":0",
            host="127.0.0.1",
        ) as local,
    ):
        yield str(local.scheduler_address), time.perf_counter() - started


def first_lines(items: list[dict[str, Any]], lines: int) -> tuple[float, float, int]:
    """A live server with 2 pool workers, ready: seconds to the first NDJSON line and to the
    last one read (``lines`` of them, then the stream is closed; 0: read to the end)."""
    import httpx

    sys.path.insert(0, str(Path(__file__).resolve().parents[1]))
    from live_server import running, wait_until

    os.environ["PYTHONPATH"] = str(Path(__file__).resolve().parents[2])
    body = json.dumps({"requests": items}).encode()
    with tempfile.TemporaryDirectory() as directory:
        with running(Path(directory), pool_workers="2", cache="off") as server:
            ready = server.url + "/readyz"
            wait_until(lambda: httpx.get(ready, timeout=5).status_code == 200, "ready", 120)
            started = time.perf_counter()
            first = last = 0.0
            read = 0
            with httpx.stream(
                "POST",
                server.url + "/v1/forecast-batches",
                content=body,
                headers={"accept": "application/x-ndjson", "content-type": "application/json"},
                timeout=3600,
            ) as response:
                for line in response.iter_lines():
                    if not line:
                        continue
                    json.loads(line)
                    last = time.perf_counter() - started
                    first = first or last
                    read += 1
                    if read == lines:
                        break
    return first, last, read


def load() -> str:
    return "{:.2f} {:.2f} {:.2f}".format(*os.getloadavg())


def projection(found: dict[str, Measured], count: int, stream_lines: int) -> str:
    """Minutes a run of ``count`` series would take on an idle machine (CPU per series,
    the work split over the workers, plus the start-ups measured)."""
    total, parts = 0.0, []
    for m in found.values():
        seconds = m.startup + count * (m.cpu / m.series) / m.workers
        total += seconds
        parts.append(f"{m.name} {seconds / 60:.1f} min")
    if stream_lines == 0 and found:
        cpu = statistics.mean(m.cpu / m.series for m in found.values())
        parts.append(f"stream to its end about {count * cpu / 2 / 60:.1f} min")
        total += count * cpu / 2
    return f"{', '.join(parts)}; total about {total / 60:.0f} min"


LOCAL_NAMES = {"local1": "local 1 worker (this process)", "local2": "local 2 loky workers"}


def scaling(ones: list[Measured], twos: list[Measured], cores: int | None) -> str:
    """The 2/1 ratios: series per second, and the CPU per series that explains them, per
    interleaved round and their median."""
    pairs = list(zip(ones, twos, strict=True))
    rates = [two.rate / one.rate for one, two in pairs]
    cpus = [(two.cpu / two.series) / (one.cpu / one.series) for one, two in pairs]
    rounds = ""
    if len(rates) > 1:
        rounds = " (rounds: " + ", ".join(f"{r:.2f}" for r in rates) + ")"
    two, one = twos[len(twos) // 2], ones[len(ones) // 2]
    return (
        f"scaling 2/1 local workers: {statistics.median(rates):.2f} over the run{rounds}, "
        f"{two.end_to_end / one.end_to_end:.2f} with the start-ups (target >= 1.7 where two "
        f"cores are free; cores seen {cores}; load {load()}); CPU per series with 2 workers "
        f"{statistics.median(cpus):.3f}x the 1-worker figure, so at most "
        f"{2 / statistics.median(cpus):.2f} from the CPU alone, the rest time the workers "
        f"waited for a core or for work"
    )


def main() -> None:
    parser = argparse.ArgumentParser(
        description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter
    )
    parser.add_argument("--series", type=int, default=40)
    parser.add_argument("--points", type=int, default=120)
    parser.add_argument(
        "--only", default=",".join(CONFIGURATIONS), help=f"some of {','.join(CONFIGURATIONS)}"
    )
    parser.add_argument(
        "--stream-series", type=int, default=None, help="series in the NDJSON batch (all)"
    )
    parser.add_argument(
        "--stream-lines", type=int, default=20, help="lines read before closing (0: all)"
    )
    parser.add_argument("--sample-seconds", type=float, default=1.0)
    parser.add_argument(
        "--rounds", type=int, default=1, help="local1 and local2 run this often, interleaved"
    )
    parser.add_argument(
        "--coupling-series", type=int, default=4, help="series per block of the coupling probe"
    )
    parser.add_argument("--project", type=int, default=2000, help="series to project for")
    parser.add_argument("--write-csv", default=None, help="write the series as a long CSV, stop")
    args = parser.parse_args()
    chosen = [c.strip() for c in args.only.split(",") if c.strip()]
    if unknown := set(chosen) - set(CONFIGURATIONS):
        parser.error(f"--only: unknown {sorted(unknown)}")
    items = requests(args.series, args.points)
    if args.write_csv:
        long_table(items).to_csv(args.write_csv, index=False)
        return
    cores = len(os.sched_getaffinity(0)) if hasattr(os, "sched_getaffinity") else os.cpu_count()
    print(f"{args.series} series x {args.points} points, auto, horizon {HORIZON}; cores seen "
          f"{cores}; load average {load()}; {time.strftime('%H:%M:%S')}", flush=True)  # fmt: skip
    found: dict[str, Measured] = {}
    local = [c for c in ("local1", "local2") if c in chosen]
    runs: dict[str, list[Measured]] = {c: [] for c in local}
    for round_ in range(args.rounds):  # interleaved, the order turned every round
        for name in local if round_ % 2 == 0 else local[::-1]:
            workers = 1 if name == "local1" else 2
            runs[name].append(measure(LOCAL_NAMES[name], items, args.sample_seconds, workers))
    for name, measured_runs in runs.items():
        found[name] = measured_runs[len(measured_runs) // 2]
    if "cluster" in chosen:
        with cluster(2) as (address, seconds):
            found["cluster"] = measure("LocalCluster 2 workers", items, args.sample_seconds,
                                       2, address, seconds)  # fmt: skip
    if "local1" in found and "local2" in found:
        print(scaling(runs["local1"], runs["local2"], cores))
    if "local2" in found and "cluster" in found:
        ratio = found["cluster"].rate / found["local2"].rate
        print(f"LocalCluster / local, per worker: {ratio:.2f} (target within 0.8-1.2)")
    if "stream" in chosen:
        stream = items[: args.stream_series] if args.stream_series else items
        first, last, read = first_lines(stream, args.stream_lines)
        print(f"NDJSON over HTTP, {len(stream)} series posted, 2 pool workers: first line "
              f"{first:.2f} s (target < 5 s), line {read} at {last:.1f} s; "
              f"load {load()}")  # fmt: skip
    if "coupling" in chosen:
        settings, first = Settings(cache="off"), items[0]
        imported(0.0, first)
        print(coupling(lambda: answer_entry(first, 0, settings), max(3, args.rounds),
                       args.coupling_series) + f"; load {load()}", flush=True)  # fmt: skip
    if found:
        print(f"projected for --series {args.project} on an idle machine: "
              f"{projection(found, args.project, args.stream_lines)}")  # fmt: skip
    print(f"done {time.strftime('%H:%M:%S')}; load average {load()}")


if __name__ == "__main__":
    # Run as the named module, so that the workers unpickle its functions by reference
    # (importing it and the whole statistics stack) rather than by value from __main__.
    from tests.benchmarks.batch import main as named

    named()
