"""A process pool for CPU work, so that fits never run on the event loop.

Each worker is one process with its own pipe, so a job past its time budget can be stopped
by killing exactly the worker running it (a ProcessPoolExecutor cannot) and replacing it.
Admission is bounded: at most ``workers + queue_size`` jobs are admitted, the rest are told
to retry later. Workers run one BLAS thread each, so N workers use N cores, not N².
"""

from __future__ import annotations

import asyncio
import collections
import contextlib
import math
import multiprocessing
import time
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from typing import Any, TypeVar

from service.runtime.pool_errors import BudgetExceeded, PoolBusy, PoolClosed, WorkerCrashed
from service.runtime.spread import cores_idle, with_helpers
from service.runtime.workers import (
    READY,
    STARTUP_SECONDS,
    Failure,
    Worker,
    WorkerTraceback,
    default_start_method,
    receive,
)

__all__ = [
    "BudgetExceeded",
    "PoolBusy",
    "PoolClosed",
    "PoolStats",
    "WorkPool",
    "WorkerCrashed",
    "WorkerTraceback",
]

T = TypeVar("T")
RECENT_JOBS = 32


@dataclass(frozen=True)
class PoolStats:
    """The pool's occupancy, for gauges and /readyz."""

    workers: int
    alive: int
    busy: int
    queued: int
    recycled: int
    start_method: str


class WorkPool:
    """Runs picklable top-level functions in worker processes with budgets and admission control."""

    def __init__(
        self,
        workers: int,
        queue_size: int,
        budget_seconds: float,
        *,
        start_method: str | None = None,
        preload: Sequence[str] = (),
        max_jobs_per_worker: int = 0,
        on_change: Callable[[PoolStats], None] | None = None,
        on_recycle: Callable[[str], None] | None = None,
        start: bool = True,
    ) -> None:
        self.workers = workers
        self.queue_size = queue_size
        self.budget_seconds = budget_seconds
        self.max_jobs_per_worker = max_jobs_per_worker
        self.start_method = start_method or default_start_method()
        self._context = multiprocessing.get_context(self.start_method)
        if self.start_method == "forkserver" and preload:
            # Modules imported once in the fork server make every replacement start in ms.
            self._context.set_forkserver_preload(list(preload))
        self._preload = tuple(preload)
        self._on_change = on_change
        self._on_recycle = on_recycle
        self._idle: collections.deque[Worker] = collections.deque()
        self._waiters: collections.deque[asyncio.Future[Worker]] = collections.deque()
        self._all: set[Worker] = set()
        self._admitted = 0
        self._busy = 0
        self._recycled = 0
        # Wall times of the latest jobs (budget overruns and crashes included): Retry-After.
        self._recent: collections.deque[float] = collections.deque(maxlen=RECENT_JOBS)
        self._closed = False
        self._started = start
        if start:
            for _ in range(workers):
                self._spawn()
        self._changed()

    # --- public -----------------------------------------------------------------------
    async def run(
        self,
        fn: Callable[..., T],
        *args: Any,
        budget_seconds: float | None = None,
        spread: bool = False,
    ) -> T:
        """Run ``fn(*args)`` in a worker: PoolBusy when full, BudgetExceeded past the budget.

        ``spread``: the job also gets the workers idle when it starts (runtime/spread.py)."""
        if self._closed:
            raise PoolClosed("the pool is shut down")
        budget = budget_seconds if budget_seconds is not None else self.budget_seconds
        if self.full():
            raise PoolBusy(self.retry_after())
        self._admitted += 1
        self._changed()
        admitted = time.perf_counter()
        lent: list[Worker] = []
        try:
            worker = await self._acquire(budget)
            # The budget is the caller's: time spent queued for a worker counts against it.
            waited = time.perf_counter() - admitted
            lent = self._borrow() if spread else []
            if lent:
                fn, args = with_helpers, (len(lent), fn, *args)
            return await self._run_on(worker, fn, args, budget, waited)
        finally:
            for spare in lent:
                self._busy -= 1
                self._release(spare)
            self._admitted -= 1
            self._changed()

    async def start(self) -> int:
        """Start the workers of a pool built with ``start=False``, off the event loop; returns
        how many sent their start-up message in time.

        The first worker boots the fork server, which imports and warms up the statistics
        (seconds of CPU): run in a thread, the server listens and answers /healthz meanwhile.
        Each worker's start-up message is read before any job can have it, so no job waits.
        """
        ready = 0
        while len(self._all) < self.workers and not self._closed:
            worker = await asyncio.to_thread(Worker, self._context, self._preload)
            if self._closed:
                worker.stop(kill=True)
                break
            with contextlib.suppress(TimeoutError, EOFError, OSError):
                worker.ready = await receive(worker, STARTUP_SECONDS) == READY
            ready += worker.ready
            self._all.add(worker)
            self._watch(worker)
            self._release(worker)
            self._changed()
        self._started = True
        return ready

    def readiness(self) -> str:
        """Whether the pool can take work now (/readyz says 503 unless ``ok``): ``warming``
        until ``start`` is done, ``broken`` when closed or a worker is missing or dead,
        ``saturated`` when the queue is full. A replacement worker forks from the warm fork
        server in milliseconds, so it counts at once."""
        if self._closed or (self._started and not self.alive()):
            return "broken"
        if not self._started:
            return "warming"
        if len(self._all) < self.workers:
            return "broken"
        if self.full():
            return "saturated"
        return "ok"

    def full(self) -> bool:
        """Every worker busy and the queue full: a new job would be refused. Cheap enough to
        ask before a request's body is even read."""
        return self._admitted >= self.workers + self.queue_size

    async def wait_until_ready(self, timeout: float | None = None) -> int:
        """Wait for every idle worker's start-up message; returns how many are ready.

        Called before the server takes traffic, so the first requests do not wait for the
        workers' start (figures in tests/benchmarks/RESULTS.md). A worker that is not ready in
        time is left to the first job, which replaces it.
        """
        limit = STARTUP_SECONDS if timeout is None else timeout
        for worker in list(self._idle):
            if worker.ready:
                continue
            try:
                message = await receive(worker, limit)
            except (TimeoutError, EOFError, OSError):
                continue
            worker.ready = message == READY
        return sum(1 for w in self._idle if w.ready)

    def recent_job_seconds(self) -> float:
        """Mean wall time of the latest jobs (1 s before any has run)."""
        return sum(self._recent) / len(self._recent) if self._recent else 1.0

    def retry_after(self) -> int:
        """Seconds a refused caller should wait: the jobs admitted ahead of it, shared by the
        workers, at the mean wall time of the latest jobs; at most the time the whole queue
        takes if every job uses its full budget."""
        ahead = (self._admitted + 1) / max(1, self.workers)
        longest = self.budget_seconds * (1 + self.queue_size / max(1, self.workers))
        return max(1, min(math.ceil(longest), math.ceil(ahead * self.recent_job_seconds())))

    def stats(self) -> PoolStats:
        """Workers configured and alive, busy and queued jobs, workers recycled so far."""
        return PoolStats(
            workers=self.workers,
            alive=sum(1 for w in self._all if w.process.is_alive()),
            busy=self._busy,
            queued=max(0, self._admitted - self._busy),
            recycled=self._recycled,
            start_method=self.start_method,
        )

    def alive(self) -> bool:
        """True while the pool is open and every worker process is running."""
        return not self._closed and all(w.process.is_alive() for w in self._all)

    def close(self) -> None:
        """Stop the workers; jobs still waiting fail with PoolClosed."""
        self._closed = True
        for waiter in self._waiters:
            if not waiter.done():
                waiter.set_exception(PoolClosed("the pool is shut down"))
        self._waiters.clear()
        for worker in list(self._all):
            worker.unwatch()
            worker.stop(kill=worker not in self._idle)
        for worker in list(self._all):
            worker.process.join(timeout=1.0)
            if worker.process.is_alive():
                worker.process.kill()
                worker.process.join(timeout=1.0)
        self._all.clear()
        self._idle.clear()

    # --- internals --------------------------------------------------------------------
    def _spawn(self) -> None:
        worker = Worker(self._context, self._preload)
        self._all.add(worker)
        self._watch(worker)
        self._release(worker)

    def _watch(self, worker: Worker) -> None:
        """Replace the worker as soon as its process exits while idle (out-of-memory killer,
        an operator), so readiness heals without waiting for a request to find it dead."""
        try:
            loop = asyncio.get_running_loop()
        except RuntimeError:
            return  # no loop (a pool driven by asyncio.run per call): found dead at _acquire
        loop.add_reader(worker.process.sentinel, self._exited, worker)
        worker.watched_by = loop

    def _exited(self, worker: Worker) -> None:
        worker.unwatch()
        if worker in self._idle and not self._closed:
            self._idle.remove(worker)
            self._replace(worker, "crash")
            self._changed()
        # A busy worker's job sees its pipe close and reports the crash itself.

    def _borrow(self) -> list[Worker]:
        """Idle workers (as many as the machine has idle cores besides the job's), reserved
        for one job when none waits: a request arriving meanwhile waits for that job's end."""
        lent: list[Worker] = []
        idle_cores = cores_idle()
        while self._idle and not self._waiters and len(lent) < idle_cores - 1:
            worker = self._idle.popleft()
            if not worker.process.is_alive():
                self._replace(worker, "crash")
                continue
            lent.append(worker)
            self._busy += 1
        return lent

    def _release(self, worker: Worker) -> None:
        while self._waiters:
            waiter = self._waiters.popleft()
            if not waiter.done():
                waiter.set_result(worker)
                return
        self._idle.append(worker)

    async def _acquire(self, budget: float) -> Worker:
        """An idle, living worker; waits at most ``budget`` seconds, then PoolBusy."""
        while True:
            worker = self._idle.popleft() if self._idle else await self._wait(budget)
            if worker.process.is_alive():
                return worker
            # Died while idle (out-of-memory killer, an operator): not this job's fault.
            self._replace(worker, "crash")

    async def _wait(self, budget: float) -> Worker:
        waiter: asyncio.Future[Worker] = asyncio.get_running_loop().create_future()
        self._waiters.append(waiter)
        try:
            # Waiting longer than a job may run means the queue is not draining: refuse.
            return await asyncio.wait_for(asyncio.shield(waiter), budget)
        except TimeoutError:
            if _handed(waiter):
                return waiter.result()
            waiter.cancel()
            raise PoolBusy(self.retry_after()) from None
        except asyncio.CancelledError:
            if _handed(waiter):
                self._release(waiter.result())
            else:
                waiter.cancel()
            raise
        finally:
            with contextlib.suppress(ValueError):
                self._waiters.remove(waiter)

    async def _run_on(
        self, worker: Worker, fn: Callable[..., T], args: Any, budget: float, waited: float = 0.0
    ) -> T:
        recycle: str | None = None
        self._busy += 1
        self._changed()
        started = time.perf_counter()
        sent = False
        try:
            if not worker.ready:
                message = await receive(worker, STARTUP_SECONDS)
                if message != READY:
                    raise WorkerCrashed(worker.process.exitcode)
                worker.ready = True
            left = budget - waited - (time.perf_counter() - started)
            if left <= 0:
                raise BudgetExceeded(budget)  # queued for the whole budget; the worker is free
            worker.conn.send((fn, args))
            sent = True
            worker.jobs += 1
            try:
                reply = await receive(worker, left)
            except TimeoutError:
                recycle = "budget"
                raise BudgetExceeded(budget) from None
            if isinstance(reply, Failure):
                raise reply.error from WorkerTraceback(reply.trace)
            if self.max_jobs_per_worker and worker.jobs >= self.max_jobs_per_worker:
                recycle = "retired"
            return reply
        except (EOFError, OSError):
            recycle = "crash"
            raise WorkerCrashed(worker.process.exitcode) from None
        except WorkerCrashed:
            recycle = "crash"
            raise
        except asyncio.CancelledError:
            # Nobody waits for this answer any more: free the CPU rather than finish it.
            recycle = "cancelled"
            raise
        finally:
            if sent and recycle != "cancelled":
                self._recent.append(time.perf_counter() - started)
            self._busy -= 1
            if recycle is None:
                self._release(worker)
            else:
                self._replace(worker, recycle)
            self._changed()

    def _replace(self, worker: Worker, reason: str) -> None:
        self._all.discard(worker)
        worker.unwatch()
        worker.stop(kill=reason != "retired")
        # Reap without blocking the loop; a killed process exits at once.
        worker.process.join(timeout=0)
        self._recycled += 1
        if self._on_recycle is not None:
            self._on_recycle(reason)
        if not self._closed:
            self._spawn()

    def _changed(self) -> None:
        if self._on_change is not None:
            stats = self.stats()
            self._on_change(stats)


def _handed(waiter: asyncio.Future[Worker]) -> bool:
    """True when a worker was handed to this waiter (possibly just as it gave up)."""
    return waiter.done() and not waiter.cancelled() and waiter.exception() is None
