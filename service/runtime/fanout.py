"""Run one job function over many items: loky processes locally, a Dask cluster when asked.

Results come back in order of completion, so a caller can write and report each as it
finishes. Locally joblib's loky backend keeps a pool of processes with one BLAS thread each.
On a cluster the jobs go to ``distributed`` directly rather than through joblib's Dask
backend: `as_completed` hands each result back as it finishes and a bounded window of
submitted futures keeps the scheduler's and workers' memory flat over 10,000 series, with
the same job function and nothing else to install on the workers than Windvane itself.
Workers should run with WORKER_SETTINGS (see there): distributed's sampling profiler would
otherwise hold hundreds of MB per worker of the fits' deep stacks.
"""

from __future__ import annotations

import os
from collections.abc import Callable, Iterable, Iterator
from itertools import islice
from typing import Any

# The environment variable naming a Dask scheduler when no address is given on the command line.
SCHEDULER_VARIABLE = "WINDVANE_DASK_SCHEDULER"
CONNECT_SECONDS = 30
# Dask settings for the workers that run the batch job. distributed's worker samples the
# running task's stack every 10 ms and keeps one profile per second for its last 1,000
# seconds (distributed.admin.low-level-log-length), twice: the statistics stack's deep,
# varied frames made that about 0.4 MB a second, a worker growing from 370 to 650 MB over
# 2,000 series where loky workers stay flat. Nobody reads those profiles in a batch run.
# Set before starting a LocalCluster (its nannies pass the settings on) or as
# DASK_DISTRIBUTED__WORKER__PROFILE__ENABLED=false in the workers' environment.
WORKER_SETTINGS: dict[str, Any] = {"distributed.worker.profile.enabled": False}
# Items handed to the loky pool ahead of the free workers: enough that a worker finishing a
# series finds the next one queued, few enough that the parent holds little in memory.
AHEAD = 4


def scheduler_address(given: str | None) -> str | None:
    """The cluster to use: the given address, else WINDVANE_DASK_SCHEDULER, else none."""
    return given or os.environ.get(SCHEDULER_VARIABLE) or None


def fan_out(
    fn: Callable[..., Any],
    items: Iterable[tuple[Any, ...]],
    *,
    workers: int = 1,
    scheduler: str | None = None,
    on_error: Callable[[tuple[Any, ...], BaseException], Any] | None = None,
) -> Iterator[Any]:
    """``fn(*item)`` for every item, yielded in order of completion.

    ``workers`` loky processes (1: in this process), or the Dask cluster at ``scheduler``;
    ``on_error`` turns an item whose cluster worker was lost into a result."""
    if scheduler:
        return _on_dask(fn, items, scheduler, on_error)
    return _on_loky(fn, items, workers)


def local_pool(workers: int) -> Any:
    """joblib's configuration of the local loky pool: ``workers`` processes, one BLAS thread
    each. joblib keeps the processes between calls made under the same configuration, so a
    caller can start them (and import in them) before the work, as the batch benchmark does."""
    from joblib import parallel_config

    return parallel_config(backend="loky", n_jobs=workers, inner_max_num_threads=1)


def _on_loky(
    fn: Callable[..., Any], items: Iterable[tuple[Any, ...]], workers: int
) -> Iterator[Any]:
    from joblib import Parallel, delayed

    if workers <= 1:
        for item in items:
            yield fn(*item)
        return
    with local_pool(workers):
        run = Parallel(
            return_as="generator_unordered", pre_dispatch=f"{AHEAD}*n_jobs", batch_size=1
        )
        yield from run(delayed(fn)(*item) for item in items)


def _on_dask(
    fn: Callable[..., Any],
    items: Iterable[tuple[Any, ...]],
    address: str,
    on_error: Callable[[tuple[Any, ...], BaseException], Any] | None,
) -> Iterator[Any]:
    from distributed import Client, as_completed

    with Client(address, timeout=CONNECT_SECONDS) as client:
        threads = max(1, sum(client.nthreads().values()))
        pending = iter(items)
        submitted: dict[Any, tuple[Any, ...]] = {}

        def submit(item: tuple[Any, ...]) -> Any:
            future = client.submit(fn, *item, pure=False)
            submitted[future.key] = item
            return future

        running = as_completed([submit(item) for item in islice(pending, AHEAD * threads)])
        for future in running:
            item = submitted.pop(future.key)
            try:
                result = future.result()
            except Exception as exc:  # the worker died under it (KilledWorker, lost memory)
                if on_error is None:
                    raise
                result = on_error(item, exc)
            future.release()
            for more in islice(pending, 1):
                running.add(submit(more))
            yield result
