"""One request's candidates spread over the cores the pool lends it while they are idle.

When a request for model "auto" finds other pool workers idle and nobody waiting, the pool
lends them to it (``WorkPool.run(..., spread=True)``): they stay reserved, and the worker
running the job forks that many helper processes that take candidates from a shared queue
beside it. Forked from the warm worker, a helper starts in milliseconds with everything
imported and shares the series without copying; only the candidates' results travel back
(pickled, as they would from any pool). Each candidate is evaluated exactly as in one process,
so the answer is the same; the figures are in tests/benchmarks/RESULTS.md.
"""

from __future__ import annotations

import contextlib
import ctypes
import os
import pickle
import signal
import struct
from collections.abc import Callable, Iterable, Sequence
from typing import Any, NoReturn, TypeVar

T = TypeVar("T")
R = TypeVar("R")

_lent = 0
"""Helper processes this job may start (set by ``with_helpers`` for the job's duration)."""

_INDEX = struct.Struct("=i")
_PR_SET_PDEATHSIG = 1


def cores_idle() -> int:
    """Cores no other process wants right now: the cores this process may use minus the
    processes the kernel counts runnable at this instant besides the caller (Linux's
    /proc/loadavg; 0 where unknown, so nothing is lent). Lent workers only help on free
    cores: a helper competing for a busy one made auto slower (tests/benchmarks/RESULTS.md).
    The instant count, unlike the load average, does not remember our own last job."""
    try:
        with open("/proc/loadavg", "rb") as stream:
            runnable = int(stream.read().split()[3].split(b"/")[0])
        cores = len(os.sched_getaffinity(0))
    except (OSError, ValueError, IndexError, AttributeError):
        return 0
    return max(0, cores - (runnable - 1))


def with_helpers(helpers: int, fn: Callable[..., R], *args: Any) -> R:
    """Run ``fn(*args)`` with ``helpers`` lent cores (what the pool sends the worker)."""
    global _lent
    _lent = helpers
    try:
        return fn(*args)
    finally:
        _lent = 0


def lent_map() -> Callable[[Callable[[T], R], Sequence[T]], list[R]] | None:
    """A map over the lent cores for this job, or None when none were lent."""
    helpers = _lent
    if helpers <= 0 or not hasattr(os, "fork"):
        return None

    def spread_map(fn: Callable[[T], R], items: Sequence[T]) -> list[R]:
        return fork_map(fn, items, helpers)

    return spread_map


def fork_map(fn: Callable[[T], R], items: Sequence[T], helpers: int) -> list[R]:
    """``list(map(fn, items))`` computed by this process and up to ``helpers`` forked ones.

    Every process takes the next item's index from one pipe until it is empty, so a slow
    item does not hold the others back. A helper that dies (or cannot fork) costs nothing but
    time: the items it did not report are computed here.
    """
    items = list(items)
    helpers = min(helpers, len(items) - 1)
    if helpers <= 0:
        return [fn(item) for item in items]
    queue_read, queue_write = os.pipe()
    os.write(queue_write, b"".join(_INDEX.pack(i) for i in range(len(items))))
    os.close(queue_write)
    children: list[tuple[int, int]] = []
    try:
        for _ in range(helpers):
            result_read, result_write = os.pipe()
            pid = os.fork()
            if pid == 0:  # pragma: no cover - the helper process; its results are checked
                os.close(result_read)
                _helper(fn, items, queue_read, result_write)
            os.close(result_write)
            children.append((pid, result_read))
    except OSError:
        pass  # no more processes: this one does the rest
    results: dict[int, R] = {}
    finished = False
    try:
        for index in _indices(queue_read):
            results[index] = fn(items[index])
        finished = True
    finally:
        os.close(queue_read)
        for pid, result_read in children:
            if not finished:
                with contextlib.suppress(OSError):
                    os.kill(pid, signal.SIGKILL)
            with os.fdopen(result_read, "rb") as stream:
                with contextlib.suppress(EOFError, pickle.UnpicklingError, OSError):
                    results.update(pickle.load(stream))
            os.waitpid(pid, 0)
    for index, item in enumerate(items):
        if index not in results:
            results[index] = fn(item)
    return [results[i] for i in range(len(items))]


def _indices(queue_read: int) -> Iterable[int]:
    while True:
        chunk = os.read(queue_read, _INDEX.size)
        if len(chunk) < _INDEX.size:
            return
        yield _INDEX.unpack(chunk)[0]


def _helper(
    fn: Callable[[Any], Any], items: list[Any], queue_read: int, result_write: int
) -> NoReturn:
    """A forked helper: evaluate items from the queue, send them back, exit at once."""
    code = 0
    try:
        _die_with_parent()
        signal.signal(signal.SIGTERM, signal.SIG_DFL)
        done: dict[int, Any] = {}
        for index in _indices(queue_read):
            try:
                done[index] = fn(items[index])
            except Exception:
                # Left out: the parent evaluates it again and sees the error itself.
                continue
        with os.fdopen(result_write, "wb") as stream:
            pickle.dump(done, stream, protocol=pickle.HIGHEST_PROTOCOL)
    except BaseException:
        code = 1
    finally:
        os._exit(code)


def _die_with_parent() -> None:
    """Linux: the helper is killed with the worker (a job past its budget is killed)."""
    with contextlib.suppress(OSError, AttributeError):
        libc = ctypes.CDLL(None, use_errno=True)
        libc.prctl(_PR_SET_PDEATHSIG, signal.SIGKILL)
