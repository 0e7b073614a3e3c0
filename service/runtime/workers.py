"""The worker side of the pool: one process per worker, its pipe, and its main loop.

A worker imports the statistics once, pins BLAS to one thread, says it is ready, then runs
``(fn, args)`` messages until told to stop. Its exceptions come back with the traceback text
the worker saw, so a logged internal error shows the worker's frames.
"""

from __future__ import annotations

import asyncio
import contextlib
import multiprocessing
import os
import signal
import traceback
from collections.abc import Sequence
from dataclasses import dataclass
from multiprocessing.connection import Connection
from typing import Any

# Read by OpenMP, OpenBLAS, MKL and Accelerate when they load; OPENBLAS_CORETYPE is left alone.
THREAD_VARIABLES = (
    "OMP_NUM_THREADS",
    "OPENBLAS_NUM_THREADS",
    "MKL_NUM_THREADS",
    "VECLIB_MAXIMUM_THREADS",
    "NUMEXPR_NUM_THREADS",
)
STARTUP_SECONDS = 120.0
READY = "ready"


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
class Failure:
    """An exception raised by a job, shipped back with its traceback text for the log."""

    error: BaseException
    trace: str


class Worker:
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


async def receive(worker: Worker, timeout: float) -> Any:
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


def default_start_method() -> str:
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
    conn.send(READY)
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
            reply = Failure(exc, traceback.format_exc())
        try:
            conn.send(reply)
        except Exception as exc:  # an answer or an error that will not pickle
            trace = reply.trace if isinstance(reply, Failure) else traceback.format_exc()
            conn.send(Failure(RuntimeError(f"the job's result could not be sent: {exc}"), trace))
