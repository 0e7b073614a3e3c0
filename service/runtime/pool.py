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
import os
import signal
import time
import traceback
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from multiprocessing.connection import Connection
from typing import Any, TypeVar

T = TypeVar("T")

# Read by OpenMP, OpenBLAS, MKL and Accelerate when they load; OPENBLAS_CORETYPE is left alone.
THREAD_VARIABLES = (
    "OMP_NUM_THREADS",
    "OPENBLAS_NUM_THREADS",
    "MKL_NUM_THREADS",
    "VECLIB_MAXIMUM_THREADS",
    "NUMEXPR_NUM_THREADS",
)
STARTUP_SECONDS = 120.0
RECENT_JOBS = 32
_READY = "ready"


class PoolBusy(RuntimeError):
    """The admission queue is full; the caller should retry later."""

    def __init__(self, retry_after: int) -> None:
        super().__init__("all workers are busy and the queue is full")
        self.retry_after = retry_after


class BudgetExceeded(RuntimeError):
    """A job ran past its time budget; its worker was killed and replaced."""

    def __init__(self, budget_seconds: float) -> None:
        super().__init__(f"the work took longer than its budget of {budget_seconds:g} s")
        self.budget_seconds = budget_seconds


class WorkerCrashed(RuntimeError):
    """The worker running a job died (killed, out of memory, a crash in native code)."""

    def __init__(self, exitcode: int | None) -> None:
        super().__init__(f"the worker process running this job died (exit code {exitcode})")
        self.exitcode = exitcode


class PoolClosed(RuntimeError):
    """The pool was shut down while the job waited."""


class WorkerTraceback(Exception):
    """The traceback of a job's exception as the worker saw it.

    A job's exception is re-raised in the server chained to this one (``raise error from
    WorkerTraceback(text)``), so a logged internal error shows the worker's frames, which
    pickling the exception alone would lose.
    """

    def __init__(self, text: str) -> None:
        super().__init__(text)
        self.text = text

    def __str__(self) -> str:
        return f"\n\n(in the worker process)\n{self.text}"


@dataclass(frozen=True)
class PoolStats:
    """The pool's occupancy, for gauges and /readyz."""

    workers: int
    alive: int
    busy: int
    queued: int
    recycled: int
    start_method: str


@dataclass(frozen=True)
class _Failure:
    """An exception raised by a job, shipped back with its traceback text for the log."""

    error: BaseException
    trace: str


class _Worker:
    """One worker process and the parent's end of its pipe."""

    def __init__(self, context: Any, preload: Sequence[str]) -> None:
        parent, child = context.Pipe(duplex=True)
        self.conn: Connection = parent
        self.process = context.Process(
            target=serve, args=(child, tuple(preload)), daemon=True, name="windvane-worker"
        )
        self.process.start()
        child.close()
        self.ready = False
        self.jobs = 0
        self.watched_by: asyncio.AbstractEventLoop | None = None

    def unwatch(self) -> None:
        """Stop watching for this process's exit (it is being replaced or stopped)."""
        loop, self.watched_by = self.watched_by, None
        if loop is not None:
            with contextlib.suppress(Exception):  # a closed loop has nothing to remove
                loop.remove_reader(self.process.sentinel)

    def stop(self, kill: bool) -> None:
        """Ask an idle worker to exit, or kill a busy one; never blocks for long."""
        with contextlib.suppress(OSError, ValueError):
            if kill:
                self.process.kill()
            else:
                self.conn.send(None)
        with contextlib.suppress(OSError):
            self.conn.close()


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
        self.start_method = start_method or _default_start_method()
        self._context = multiprocessing.get_context(self.start_method)
        if self.start_method == "forkserver" and preload:
            # Modules imported once in the fork server make every replacement start in ms.
            self._context.set_forkserver_preload(list(preload))
        self._preload = tuple(preload)
        self._on_change = on_change
        self._on_recycle = on_recycle
        self._idle: collections.deque[_Worker] = collections.deque()
        self._waiters: collections.deque[asyncio.Future[_Worker]] = collections.deque()
        self._all: set[_Worker] = set()
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
    async def run(self, fn: Callable[..., T], *args: Any, budget_seconds: float | None = None) -> T:
        """Run ``fn(*args)`` in a worker: PoolBusy when full, BudgetExceeded past the budget."""
        if self._closed:
            raise PoolClosed("the pool is shut down")
        budget = budget_seconds if budget_seconds is not None else self.budget_seconds
        if self.full():
            raise PoolBusy(self.retry_after())
        self._admitted += 1
        self._changed()
        admitted = time.perf_counter()
        try:
            worker = await self._acquire(budget)
            # The budget is the caller's: time spent queued for a worker counts against it.
            waited = time.perf_counter() - admitted
            return await self._run_on(worker, fn, args, budget, waited)
        finally:
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
            worker = await asyncio.to_thread(_Worker, self._context, self._preload)
            if self._closed:
                worker.stop(kill=True)
                break
            with contextlib.suppress(TimeoutError, EOFError, OSError):
                worker.ready = await _receive(worker, STARTUP_SECONDS) == _READY
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
        workers' start (measured: the first auto job on a just-built pool took 1.3 s against
        0.7 s). A worker that is not ready in time is left to the first job, which replaces it.
        """
        limit = STARTUP_SECONDS if timeout is None else timeout
        for worker in list(self._idle):
            if worker.ready:
                continue
            try:
                message = await _receive(worker, limit)
            except (TimeoutError, EOFError, OSError):
                continue
            worker.ready = message == _READY
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
        worker = _Worker(self._context, self._preload)
        self._all.add(worker)
        self._watch(worker)
        self._release(worker)

    def _watch(self, worker: _Worker) -> None:
        """Replace the worker as soon as its process exits while idle (out-of-memory killer,
        an operator), so readiness heals without waiting for a request to find it dead."""
        try:
            loop = asyncio.get_running_loop()
        except RuntimeError:
            return  # no loop (a pool driven by asyncio.run per call): found dead at _acquire
        loop.add_reader(worker.process.sentinel, self._exited, worker)
        worker.watched_by = loop

    def _exited(self, worker: _Worker) -> None:
        worker.unwatch()
        if worker in self._idle and not self._closed:
            self._idle.remove(worker)
            self._replace(worker, "crash")
            self._changed()
        # A busy worker's job sees its pipe close and reports the crash itself.

    def _release(self, worker: _Worker) -> None:
        while self._waiters:
            waiter = self._waiters.popleft()
            if not waiter.done():
                waiter.set_result(worker)
                return
        self._idle.append(worker)

    async def _acquire(self, budget: float) -> _Worker:
        """An idle, living worker; waits at most ``budget`` seconds, then PoolBusy."""
        while True:
            worker = self._idle.popleft() if self._idle else await self._wait(budget)
            if worker.process.is_alive():
                return worker
            # Died while idle (out-of-memory killer, an operator): not this job's fault.
            self._replace(worker, "crash")

    async def _wait(self, budget: float) -> _Worker:
        waiter: asyncio.Future[_Worker] = asyncio.get_running_loop().create_future()
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
        self, worker: _Worker, fn: Callable[..., T], args: Any, budget: float, waited: float = 0.0
    ) -> T:
        recycle: str | None = None
        self._busy += 1
        self._changed()
        started = time.perf_counter()
        sent = False
        try:
            if not worker.ready:
                message = await _receive(worker, STARTUP_SECONDS)
                if message != _READY:
                    raise WorkerCrashed(worker.process.exitcode)
                worker.ready = True
            left = budget - waited - (time.perf_counter() - started)
            if left <= 0:
                raise BudgetExceeded(budget)  # queued for the whole budget; the worker is free
            worker.conn.send((fn, args))
            sent = True
            worker.jobs += 1
            try:
                reply = await _receive(worker, left)
            except TimeoutError:
                recycle = "budget"
                raise BudgetExceeded(budget) from None
            if isinstance(reply, _Failure):
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

    def _replace(self, worker: _Worker, reason: str) -> None:
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


def _handed(waiter: asyncio.Future[_Worker]) -> bool:
    """True when a worker was handed to this waiter (possibly just as it gave up)."""
    return waiter.done() and not waiter.cancelled() and waiter.exception() is None


async def _receive(worker: _Worker, timeout: float) -> Any:
    """The next message from a worker, waiting on its pipe without blocking the loop."""
    loop = asyncio.get_running_loop()
    readable: asyncio.Future[None] = loop.create_future()
    fd = worker.conn.fileno()

    def wake() -> None:
        if not readable.done():
            readable.set_result(None)

    loop.add_reader(fd, wake)
    try:
        await asyncio.wait_for(readable, timeout)
    finally:
        loop.remove_reader(fd)
        # uvloop (uvicorn's loop) leaves a watched fd non-blocking: a reply larger than the
        # socket buffer then failed recv() with BlockingIOError, reported as a crashed worker.
        os.set_blocking(fd, True)
    # The worker writes a whole message at once; reading it back is a memory copy.
    return worker.conn.recv()


def _default_start_method() -> str:
    return "forkserver" if "forkserver" in multiprocessing.get_all_start_methods() else "spawn"


def pin_threads() -> None:
    """One BLAS/OpenMP thread in this process: set before the libraries load, limit after."""
    for name in THREAD_VARIABLES:
        os.environ[name] = "1"
    try:
        from threadpoolctl import threadpool_limits
    except ImportError:
        return
    threadpool_limits(1)


def serve(conn: Connection, preload: tuple[str, ...]) -> None:
    """A worker's main loop: receive (fn, args), send back the result or the failure."""
    # Ctrl-C reaches the whole process group; the server shuts the workers down itself.
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    pin_threads()
    for module in preload:
        __import__(module)
    pin_threads()
    conn.send(_READY)
    while True:
        try:
            message = conn.recv()
        except (EOFError, OSError):
            return
        if message is None:
            return
        fn, args = message
        try:
            reply: Any = fn(*args)
        except BaseException as exc:
            reply = _Failure(exc, traceback.format_exc())
        try:
            conn.send(reply)
        except Exception as exc:  # an answer or an error that will not pickle
            trace = reply.trace if isinstance(reply, _Failure) else traceback.format_exc()
            conn.send(_Failure(RuntimeError(f"the job's result could not be sent: {exc}"), trace))
