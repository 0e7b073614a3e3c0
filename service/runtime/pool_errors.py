"""What the work pool raises to its callers (re-exported by runtime/pool.py)."""

from __future__ import annotations


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
