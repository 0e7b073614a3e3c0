"""fork_map: the same results as map, in order, with helper processes or without them."""

from __future__ import annotations

import os

import pytest

from service.runtime import spread


def square_and_pid(x: int) -> tuple[int, int]:
    return x * x, os.getpid()


def test_fork_map_returns_what_map_returns_in_order() -> None:
    out = spread.fork_map(square_and_pid, list(range(12)), helpers=1)
    assert [v for v, _ in out] == [x * x for x in range(12)]


def test_items_are_shared_between_this_process_and_the_helper() -> None:
    import time

    def slow(x: int) -> int:
        time.sleep(0.03)
        return os.getpid()

    pids = spread.fork_map(slow, list(range(8)), helpers=1)
    assert os.getpid() in pids and len(set(pids)) == 2


def test_an_item_the_helper_could_not_compute_is_computed_here() -> None:
    parent = os.getpid()

    def only_here(x: int) -> int:
        if os.getpid() != parent:
            os._exit(7)  # the helper dies on its first item
        return x + 1

    assert spread.fork_map(only_here, list(range(6)), helpers=1) == list(range(1, 7))


def test_an_error_is_raised_here() -> None:
    def boom(x: int) -> int:
        if x == 3:
            raise ValueError("three")
        return x

    with pytest.raises(ValueError, match="three"):
        spread.fork_map(boom, list(range(6)), helpers=1)


def test_without_lent_cores_there_is_no_map() -> None:
    assert spread.lent_map() is None
    assert spread.with_helpers(1, lambda: spread.lent_map() is not None)
    assert spread.lent_map() is None


def test_idle_cores_are_counted_within_the_cores_this_process_may_use() -> None:
    assert 0 <= spread.cores_idle() <= len(os.sched_getaffinity(0))
