"""What the batch benchmark watches while a configuration runs: resident memory and CPU of
each worker process, the CPU the rest of the machine used, and how much a series' CPU rises
when the other core runs a plain loop (the cores' coupling, a property of the machine).

Kept apart from tests/benchmarks/batch.py so that each stays a readable size; the benchmark
prints these figures beside every configuration.
"""

from __future__ import annotations

import contextlib
import os
import statistics
import threading
import time
from collections.abc import Callable, Iterable
from dataclasses import dataclass
from pathlib import Path
from typing import Any

# Memory rule: a worker is flat when the median resident size over the last quarter of the
# run is at most FLAT_GROWTH times the median over its first quarter, once the first tenth
# of the run (the first fits' allocations) is left out.
FLAT_GROWTH = 1.10
SETTLING_SHARE = 0.1


def machine_busy() -> float:
    """CPU seconds all processes of the machine have used since boot (Linux /proc/stat; steal
    counted as busy, since it is a core this machine did not get)."""
    try:
        with open("/proc/stat", encoding="ascii") as stream:
            fields = [int(x) for x in stream.readline().split()[1:9]]
    except (OSError, ValueError):
        return float("nan")
    return (sum(fields) - fields[3] - fields[4]) / os.sysconf("SC_CLK_TCK")


def process_cpu(processes: Iterable[Any]) -> dict[int, float]:
    """User + system CPU seconds of each psutil process still running, by process id."""
    found = {}
    for process in processes:
        try:
            times = process.cpu_times()
        except Exception:  # gone: its CPU is no longer counted anywhere
            continue
        found[process.pid] = times.user + times.system
    return found


def scheduling(process: Any) -> tuple[int, int]:
    """Times the kernel took the process's threads off their core for another (involuntary
    switches) and moved them to the other core (migrations), summed over the threads alive
    (Linux /proc/PID/task/*: a Dask worker runs the job in a thread of its own); (0, 0) if
    unknown."""
    switched = moved = 0
    try:
        for task in Path(f"/proc/{process.pid}/task").iterdir():
            with contextlib.suppress(OSError, StopIteration, ValueError):
                status = (task / "status").read_text(encoding="ascii").splitlines()
                sched = (task / "sched").read_text(encoding="ascii").splitlines()
                switched += next(int(x.split()[1]) for x in status if x.startswith("nonvol"))
                moved += next(int(x.split(":")[1]) for x in sched if "nr_migrations" in x)
    except OSError:  # gone, or not Linux
        return 0, 0
    return switched, moved


class Sampler(threading.Thread):
    """Resident bytes of each worker process every ``every`` seconds; CPU of the workers, of
    this process with all its descendants (the benchmark's own processes) and of the machine
    between ``start`` and ``stop``."""

    def __init__(self, pids: list[int], every: float) -> None:
        import psutil

        super().__init__(daemon=True)
        self.processes = {pid: psutil.Process(pid) for pid in pids}
        me = psutil.Process()
        self.ours = {p.pid: p for p in [me, *me.children(recursive=True), *self.processes.values()]}
        self.every = every
        self.samples: dict[int, list[tuple[float, int]]] = {pid: [] for pid in pids}
        self.halt = threading.Event()
        self.cpu_before = process_cpu(self.ours.values())
        self.scheduled = {pid: scheduling(p) for pid, p in self.processes.items()}
        self.machine_before = machine_busy()
        self.wall_before = time.monotonic()
        self.cpu_after: dict[int, float] = {}
        self.others = float("nan")

    def sample(self) -> None:
        now = time.monotonic()
        for pid, process in self.processes.items():
            try:
                self.samples[pid].append((now, int(process.memory_info().rss)))
            except Exception:  # a worker gone: its series say so
                continue

    def run(self) -> None:
        self.sample()
        while not self.halt.wait(self.every):
            self.sample()

    def stop(self) -> None:
        self.halt.set()
        self.join()
        self.sample()
        self.cpu_after = process_cpu(self.ours.values())
        for pid, process in self.processes.items():
            now, before = scheduling(process), self.scheduled[pid]
            self.scheduled[pid] = (now[0] - before[0], now[1] - before[1])
        ours = sum(self.cpu_after[p] - self.cpu_before.get(p, 0.0) for p in self.cpu_after)
        wall = time.monotonic() - self.wall_before
        self.others = max(0.0, machine_busy() - self.machine_before - ours) / wall

    def worker_cpu(self, pid: int) -> float:
        """CPU seconds the worker used between start and stop (NaN if it is gone)."""
        if pid not in self.cpu_after:
            return float("nan")
        return self.cpu_after[pid] - self.cpu_before.get(pid, 0.0)


def memory_verdict(samples: dict[int, list[tuple[float, int]]], start: float, end: float) -> str:
    """Per worker: first -> last quarter medians after the settling tenth, and the verdict."""
    settled = start + SETTLING_SHARE * (end - start)
    quarter = (end - settled) / 4
    parts, flat = [], True
    for found in samples.values():
        first = [b for t, b in found if settled <= t <= settled + quarter]
        last = [b for t, b in found if t >= end - quarter]
        if len(first) < 2 or len(last) < 2:
            return f"too few samples ({len(found)} per worker) to tell; sample more often"
        a, b = statistics.median(first), statistics.median(last)
        peak = max(x for _, x in found)
        flat = flat and b <= FLAT_GROWTH * a
        parts.append(f"{a / 1e6:.0f} -> {b / 1e6:.0f} MB ({b / a:.2f}x, peak {peak / 1e6:.0f})")
    verdict = "flat" if flat else "GROWING"
    return f"{'; '.join(parts)}: {verdict} (rule: last/first quarter <= {FLAT_GROWTH:.2f})"


@dataclass(frozen=True)
class Job:
    """One series as a worker ran it: its status, CPU seconds, process, and monotonic start
    and end (one clock for every process of the machine)."""

    status: int
    cpu: float
    pid: int
    start: float
    end: float


def worker_lines(jobs: list[Job], sampler: Sampler, begin: float, end: float) -> list[str]:
    """Per worker: series, CPU-s per series inside the jobs, the process's CPU outside them
    (receiving, sending, the pool's own checks), the share of the run spent in a job, and how
    often per series the kernel preempted it or moved it to the other core."""
    lines = []
    for pid in sorted({job.pid for job in jobs}):
        mine = [job for job in jobs if job.pid == pid]
        inside = sum(job.cpu for job in mine)
        busy = sum(job.end - job.start for job in mine) / (end - begin)
        outside = (sampler.worker_cpu(pid) - inside) / len(mine)
        switched, moved = (x / len(mine) for x in sampler.scheduled.get(pid, (0, 0)))
        lines.append(
            f"  worker {pid}: {len(mine)} series, CPU {inside / len(mine):.3f} s per series in "
            f"the job, {outside * 1000:.1f} ms outside it; in a job {busy:.1%} of the run; per "
            f"series {switched:.0f} preemptions, {moved:.1f} moves to the other core"
        )
    return lines


def spin(ready: Any, go: Any, stop: Any) -> None:
    """A co-runner: a plain Python loop (almost no memory traffic) while ``go`` is set."""
    ready.set()
    count = 0
    while not stop.is_set():
        if go.wait(0.05):
            while go.is_set():
                for _ in range(20_000):
                    count += 1


def coupling(unit: Callable[[], None], rounds: int, count: int) -> str:
    """CPU seconds of ``count`` calls of ``unit`` in this process, alone and beside a
    co-runner looping on the other core, interleaved over ``rounds``. The rise beside a plain
    loop is the machine's (cores sharing a physical core or its power budget), not the job's:
    it bounds the 2/1 scaling at 2 / (1 + rise) for any code."""
    import multiprocessing

    import psutil

    context = multiprocessing.get_context("spawn")
    ready, go, stop = context.Event(), context.Event(), context.Event()
    runner = context.Process(target=spin, args=(ready, go, stop), daemon=True)
    runner.start()
    ready.wait(120)
    looped = [psutil.Process(), psutil.Process(runner.pid)]
    alone: list[float] = []
    beside: list[float] = []
    others: list[float] = []
    unit()
    try:
        for index in range(rounds * 2):
            with_loop = (index % 2 == 1) != (index // 2 % 2 == 1)  # ABBA order against drift
            if with_loop:
                go.set()
                time.sleep(0.1)
            before = sum(process_cpu(looped).values())
            machine, wall, cpu = machine_busy(), time.monotonic(), time.process_time()
            for _ in range(count):
                unit()
            cpu = time.process_time() - cpu
            ours = sum(process_cpu(looped).values()) - before
            used, wall = machine_busy() - machine, time.monotonic() - wall
            go.clear()
            (beside if with_loop else alone).append(cpu / count)
            others.append(max(0.0, used - ours) / wall)
    finally:
        stop.set()
        go.clear()
        runner.join()
    a, b = statistics.median(alone), statistics.median(beside)
    return (
        f"coupling: CPU {a:.3f} s per series alone, {b:.3f} beside a plain loop on the other "
        f"core ({b / a:.2f}x; {rounds} interleaved rounds of {count}; other processes "
        f"{statistics.mean(others):.2f} cores on average, so a figure of the machine only near "
        f"0): 2/1 scaling at most {2 * a / b:.2f} for any code"
    )
