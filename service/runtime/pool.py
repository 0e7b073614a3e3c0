"""A process pool for CPU work, so that fits never run on the event loop."""

from __future__ import annotations

import asyncio
import multiprocessing
from collections.abc import Callable
from concurrent.futures import ProcessPoolExecutor
from typing import Any, TypeVar

T = TypeVar("T")


class PoolBusy(RuntimeError):
    """The admission queue is full; the caller should retry later."""

    def __init__(self, retry_after: int) -> None:
        super().__init__("all workers are busy and the queue is full")
        self.retry_after = retry_after


class BudgetExceeded(RuntimeError):
    """A job ran past its time budget and was abandoned."""

    def __init__(self, budget_seconds: float) -> None:
        super().__init__(f"the work took longer than its budget of {budget_seconds:g} s")
        self.budget_seconds = budget_seconds


class WorkPool:
    """Runs picklable top-level functions in worker processes with admission control."""

    def __init__(self, workers: int, queue_size: int, budget_seconds: float) -> None:
        self.workers = workers
        self.queue_size = queue_size
        self.budget_seconds = budget_seconds
        context = multiprocessing.get_context("spawn")
        self._executor = ProcessPoolExecutor(max_workers=workers, mp_context=context)
        self._slots = asyncio.Semaphore(workers + queue_size)
        self._in_flight = 0

    async def run(self, fn: Callable[..., T], *args: Any) -> T:
        """Run ``fn(*args)`` in a worker; PoolBusy when the queue is full."""
        if self._slots.locked():
            raise PoolBusy(retry_after=1)
        async with self._slots:
            self._in_flight += 1
            try:
                future = self._executor.submit(fn, *args)
                return await asyncio.wait_for(asyncio.wrap_future(future), self.budget_seconds)
            except TimeoutError as exc:
                raise BudgetExceeded(self.budget_seconds) from exc
            finally:
                self._in_flight -= 1

    def alive(self) -> bool:
        """True while the executor accepts work."""
        return not getattr(self._executor, "_broken", False)

    def close(self) -> None:
        """Stop the workers; pending work is cancelled."""
        self._executor.shutdown(wait=False, cancel_futures=True)
