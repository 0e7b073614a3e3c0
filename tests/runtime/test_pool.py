"""The worker pool: results, errors, time budgets, crashes, admission and occupancy."""

from __future__ import annotations

import asyncio
import os
import signal
import time
from collections.abc import Iterator

import pool_jobs  # tests/runtime is on sys.path; the workers inherit it
import pytest

from service.core.errors import FitError
from service.runtime.pool import (
    BudgetExceeded,
    PoolBusy,
    PoolClosed,
    PoolStats,
    WorkerCrashed,
    WorkPool,
)


@pytest.fixture(scope="module")
def pool() -> Iterator[WorkPool]:
    p = WorkPool(2, 2, budget_seconds=20.0)
    yield p
    p.close()


def test_runs_a_job_and_returns_its_result(pool: WorkPool) -> None:
    assert asyncio.run(pool.run(pool_jobs.add, 2, 3)) == 5


def test_domain_errors_come_back_with_their_fields(pool: WorkPool) -> None:
    with pytest.raises(FitError) as caught:
        asyncio.run(pool.run(pool_jobs.fail))
    assert caught.value.problems[0].field == "model.order"
    assert asyncio.run(pool.run(pool_jobs.add, 1, 1)) == 2


def test_workers_run_one_blas_thread(monkeypatch: pytest.MonkeyPatch) -> None:
    # The test process pins its own threads (conftest): a pool started without those
    # variables shows that the workers set them themselves.
    monkeypatch.delenv("OMP_NUM_THREADS", raising=False)
    monkeypatch.delenv("OPENBLAS_NUM_THREADS", raising=False)
    unpinned = WorkPool(1, 1, budget_seconds=20.0)
    try:
        seen = asyncio.run(unpinned.run(pool_jobs.threads))
    finally:
        unpinned.close()
    assert seen == {"OMP_NUM_THREADS": "1", "OPENBLAS_NUM_THREADS": "1"}


def test_jobs_run_in_parallel_on_both_workers(pool: WorkPool) -> None:
    async def two(job: object, *args: object) -> list[object]:
        return await asyncio.gather(pool.run(job, *args), pool.run(job, *args))

    pids = asyncio.run(two(pool_jobs.pid))  # also waits for both workers to start
    assert len(set(pids)) == 2
    started = time.perf_counter()
    asyncio.run(two(pool_jobs.sleep, 0.4))
    assert time.perf_counter() - started < 0.75


def test_budget_exceeded_kills_the_worker_and_the_pool_serves_the_next(pool: WorkPool) -> None:
    async def scenario() -> tuple[float, int]:
        started = time.perf_counter()
        with pytest.raises(BudgetExceeded) as caught:
            await pool.run(pool_jobs.sleep, 30.0, budget_seconds=0.3)
        assert caught.value.budget_seconds == 0.3
        waited = time.perf_counter() - started
        return waited, await pool.run(pool_jobs.add, 20, 22)

    before = pool.stats().recycled
    waited, answer = asyncio.run(scenario())
    assert waited < 2.0 and answer == 42
    assert pool.stats().recycled == before + 1
    assert pool.alive()


def test_a_crashing_worker_is_reported_and_replaced(pool: WorkPool) -> None:
    with pytest.raises(WorkerCrashed) as caught:
        asyncio.run(pool.run(pool_jobs.die))
    assert caught.value.exitcode in (3, None)
    assert asyncio.run(pool.run(pool_jobs.add, 1, 2)) == 3
    assert pool.alive()


def test_an_unsendable_result_is_an_error_not_a_hang(pool: WorkPool) -> None:
    with pytest.raises(RuntimeError, match="could not be sent"):
        asyncio.run(pool.run(pool_jobs.unpicklable))


def test_full_queue_is_refused_with_retry_after() -> None:
    small = WorkPool(1, 1, budget_seconds=10.0)
    try:

        async def scenario() -> None:
            await small.run(pool_jobs.add, 0, 0)  # wait for the worker to start
            running = asyncio.ensure_future(small.run(pool_jobs.sleep, 0.5))
            queued = asyncio.ensure_future(small.run(pool_jobs.sleep, 0.1))
            await asyncio.sleep(0.05)
            assert small.stats().busy == 1 and small.stats().queued == 1
            with pytest.raises(PoolBusy) as caught:
                await small.run(pool_jobs.add, 1, 1)
            assert caught.value.retry_after >= 1
            assert await running == 0.5 and await queued == 0.1

        asyncio.run(scenario())
    finally:
        small.close()


def test_a_job_that_cannot_get_a_worker_within_the_budget_is_refused() -> None:
    small = WorkPool(1, 5, budget_seconds=10.0)
    try:

        async def scenario() -> None:
            await small.run(pool_jobs.add, 0, 0)
            running = asyncio.ensure_future(small.run(pool_jobs.sleep, 1.0))
            await asyncio.sleep(0.05)
            with pytest.raises(PoolBusy):
                await small.run(pool_jobs.add, 1, 1, budget_seconds=0.2)
            await running
            assert await small.run(pool_jobs.add, 1, 1) == 2

        asyncio.run(scenario())
    finally:
        small.close()


def test_the_loop_stays_free_while_workers_are_busy() -> None:
    small = WorkPool(1, 1, budget_seconds=10.0)
    try:

        async def scenario() -> float:
            await small.run(pool_jobs.add, 0, 0)
            running = asyncio.ensure_future(small.run(pool_jobs.sleep, 0.5))
            await asyncio.sleep(0.02)
            worst = 0.0
            for _ in range(20):
                tick = time.perf_counter()
                await asyncio.sleep(0.01)
                worst = max(worst, time.perf_counter() - tick - 0.01)
            await running
            return worst

        assert asyncio.run(scenario()) < 0.05
    finally:
        small.close()


def test_workers_are_retired_after_their_job_count() -> None:
    recycled: list[str] = []
    small = WorkPool(1, 0, budget_seconds=10.0, max_jobs_per_worker=2, on_recycle=recycled.append)
    try:
        pids = [asyncio.run(small.run(pool_jobs.pid)) for _ in range(3)]
        assert pids[0] == pids[1] != pids[2]
        assert recycled == ["retired"]
    finally:
        small.close()


def test_occupancy_is_reported_on_every_change() -> None:
    seen: list[PoolStats] = []
    small = WorkPool(1, 0, budget_seconds=10.0, on_change=seen.append)
    try:
        asyncio.run(small.run(pool_jobs.add, 1, 1))
        assert max(s.busy for s in seen) == 1
        assert seen[-1].busy == 0 and seen[-1].queued == 0
    finally:
        small.close()


def test_a_closed_pool_refuses_work() -> None:
    small = WorkPool(1, 0, budget_seconds=10.0)
    small.close()
    assert not small.alive()
    with pytest.raises(PoolClosed):
        asyncio.run(small.run(pool_jobs.add, 1, 1))


def test_spawn_start_method_works_too() -> None:
    small = WorkPool(1, 0, budget_seconds=30.0, start_method="spawn")
    try:
        assert asyncio.run(small.run(pool_jobs.add, 2, 2)) == 4
        assert small.stats().start_method == "spawn"
    finally:
        small.close()


def test_wait_until_ready_takes_every_worker_start_up_message() -> None:
    p = WorkPool(2, 2, budget_seconds=20.0)
    try:
        assert asyncio.run(p.wait_until_ready()) == 2
        assert asyncio.run(p.wait_until_ready()) == 2  # nothing left to read: returns at once
        # The first job finds its worker ready and does not read a start-up message as a reply.
        assert asyncio.run(p.run(pool_jobs.add, 4, 5)) == 9
    finally:
        p.close()


def test_a_deferred_start_is_warming_until_its_workers_are_up() -> None:
    async def scenario() -> None:
        p = WorkPool(2, 2, budget_seconds=20.0, start=False)
        try:
            assert p.readiness() == "warming"
            assert await p.start() == 2
            assert p.readiness() == "ok"
            assert await p.run(pool_jobs.add, 1, 2) == 3
        finally:
            p.close()
        assert p.readiness() == "broken"

    asyncio.run(scenario())


def test_a_job_sent_while_the_pool_starts_waits_for_a_worker() -> None:
    async def scenario() -> None:
        p = WorkPool(1, 2, budget_seconds=20.0, start=False)
        try:
            job = asyncio.ensure_future(p.run(pool_jobs.add, 2, 3))
            await asyncio.sleep(0)
            assert await p.start() == 1
            assert await job == 5
        finally:
            p.close()

    asyncio.run(scenario())


def test_an_idle_worker_that_dies_is_replaced_without_a_request() -> None:
    async def scenario() -> None:
        p = WorkPool(1, 0, budget_seconds=20.0, start=False)
        try:
            await p.start()
            first = await p.run(pool_jobs.pid)
            os.kill(first, signal.SIGKILL)
            deadline = time.monotonic() + 20
            while p.stats().recycled == 0 and time.monotonic() < deadline:
                await asyncio.sleep(0.05)
            # Replaced by the watcher alone: no job was sent in between.
            assert p.stats().recycled == 1
            assert p.readiness() == "ok" and p.stats().alive == 1
            assert await p.run(pool_jobs.pid) != first
        finally:
            p.close()

    asyncio.run(scenario())


def test_a_full_queue_makes_the_pool_saturated() -> None:
    async def scenario() -> None:
        p = WorkPool(1, 0, budget_seconds=20.0, start=False)
        try:
            await p.start()
            job = asyncio.ensure_future(p.run(pool_jobs.sleep, 0.5))
            await asyncio.sleep(0.1)
            assert p.readiness() == "saturated"
            await job
            assert p.readiness() == "ok"
        finally:
            p.close()

    asyncio.run(scenario())


def test_time_queued_for_a_worker_counts_against_the_budget() -> None:
    small = WorkPool(1, 2, budget_seconds=3.0)
    try:

        async def scenario() -> None:
            await small.run(pool_jobs.add, 0, 0)
            running = asyncio.ensure_future(small.run(pool_jobs.sleep, 2.0))
            await asyncio.sleep(0.05)
            # Queued behind 2 s of work, 1.5 s of its own no longer fits a 3 s budget.
            with pytest.raises(BudgetExceeded):
                await small.run(pool_jobs.sleep, 1.5)
            assert await running == 2.0
            assert await small.run(pool_jobs.add, 1, 1) == 2

        asyncio.run(scenario())
    finally:
        small.close()


def test_retry_after_follows_the_recent_job_time() -> None:
    small = WorkPool(1, 1, budget_seconds=30.0)
    try:

        async def scenario() -> None:
            await small.run(pool_jobs.add, 0, 0)
            for _ in range(3):
                await small.run(pool_jobs.sleep, 1.0)
            # The mean of the latest jobs is at least 3/4 s (three of 1 s, one instant one).
            assert small.recent_job_seconds() >= 0.75
            running = asyncio.ensure_future(small.run(pool_jobs.sleep, 1.0))
            queued = asyncio.ensure_future(small.run(pool_jobs.sleep, 1.0))
            await asyncio.sleep(0.05)
            assert small.full()
            with pytest.raises(PoolBusy) as caught:
                await small.run(pool_jobs.add, 1, 1)
            # Two jobs ahead on one worker at >= 0.75 s each, plus this one's turn.
            assert caught.value.retry_after >= 3
            await running
            await queued
            assert not small.full()

        asyncio.run(scenario())
    finally:
        small.close()


def test_a_spread_job_gets_the_idle_workers_and_gives_them_back(
    monkeypatch: pytest.MonkeyPatch,
) -> None:
    monkeypatch.setattr("service.runtime.pool.cores_idle", lambda: 2)  # an idle machine
    p = WorkPool(2, 2, budget_seconds=20.0)

    async def scenario() -> tuple[tuple[int, list[int]], tuple[int, list[int]], int]:
        await p.wait_until_ready()
        spread = await p.run(pool_jobs.spread_pids, 6, spread=True)
        plain = await p.run(pool_jobs.spread_pids, 6)
        # Both workers are free again: two jobs run at once.
        pids = await asyncio.gather(p.run(pool_jobs.pid), p.run(pool_jobs.pid))
        return spread, plain, len(set(pids))

    try:
        spread, plain, workers = asyncio.run(scenario())
    finally:
        p.close()
    assert spread[0] == 1 and len(set(spread[1])) == 2  # the worker and one forked helper
    assert plain[0] == 0
    assert workers == 2
    assert p.stats().busy == 0


def test_nothing_is_lent_while_other_processes_want_the_cores(
    monkeypatch: pytest.MonkeyPatch,
) -> None:
    monkeypatch.setattr("service.runtime.pool.cores_idle", lambda: 1)  # one core, the job's
    p = WorkPool(2, 2, budget_seconds=20.0)
    try:
        lent, _ = asyncio.run(p.run(pool_jobs.spread_pids, 2, spread=True))
    finally:
        p.close()
    assert lent == 0
