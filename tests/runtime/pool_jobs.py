"""Picklable top-level jobs for the pool tests (imported by the worker processes)."""

from __future__ import annotations

import os
import time

from service.core.errors import FitError


def add(a: int, b: int) -> int:
    """A quick job."""
    return a + b


def sleep(seconds: float) -> float:
    """A job that takes ``seconds``."""
    time.sleep(seconds)
    return seconds


def pid() -> int:
    """The worker's process id."""
    return os.getpid()


def fail() -> None:
    """A job that raises a domain error naming a field."""
    raise FitError("cannot fit", field="model.order")


def die() -> None:
    """A job whose worker dies abruptly."""
    os._exit(3)


def threads() -> dict[str, str | None]:
    """The BLAS thread variables the worker sees."""
    return {name: os.environ.get(name) for name in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS")}


def unpicklable() -> object:
    """A result that cannot be sent back."""
    return lambda: None


def _divide_the_stock(parts: int) -> float:
    """A helper whose name must show up in the server's log of a failed job."""
    return 12.0 / parts


def broken() -> float:
    """A job with a programming error (not a domain refusal) two frames down."""
    return _divide_the_stock(0)


def spread_pids(count: int) -> tuple[int, list[int]]:
    """The lent cores this job got, and the processes that evaluated ``count`` items."""
    from service.runtime import spread

    map_fn = spread.lent_map()
    if map_fn is None:
        return 0, [os.getpid()] * count
    return spread._lent, map_fn(_slow_pid, list(range(count)))


def _slow_pid(_: int) -> int:
    time.sleep(0.05)
    return os.getpid()
