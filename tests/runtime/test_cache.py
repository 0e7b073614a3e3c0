"""The two cache levels: LRU bounds, disk persistence, corrupt entries and bad directories."""

from __future__ import annotations

import logging
import os
from pathlib import Path

import pandas as pd
import pytest

from service.core.models.naive import NaiveSpec
from service.runtime.cache import Cache, FitStore, ResponseCache, prepare_directory
from service.runtime.keys import Key, KeyBuilder


def key(name: str) -> Key:
    return KeyBuilder("test").text("name", name).finish()


def test_lru_evicts_the_oldest_used_by_count() -> None:
    lru: ResponseCache[str] = ResponseCache(max_entries=2, max_bytes=1000)
    lru.put(key("a"), "A", 1)
    lru.put(key("b"), "B", 1)
    assert lru.get(key("a")).value == "A"  # a is now the most recent
    lru.put(key("c"), "C", 1)
    assert lru.get(key("b")).result == "miss"
    assert lru.get(key("a")).hit and lru.get(key("c")).hit


def test_lru_is_bounded_in_bytes() -> None:
    lru: ResponseCache[str] = ResponseCache(max_entries=100, max_bytes=10)
    assert lru.put(key("a"), "A", 6)
    assert lru.put(key("b"), "B", 6)
    assert lru.get(key("a")).result == "miss"
    assert lru.size_bytes == 6
    assert not lru.put(key("huge"), "H", 11)


def test_fitted_model_round_trips_through_disk(tmp_path: Path) -> None:
    y = pd.Series([1.0, 3.0, 2.0, 5.0], index=pd.date_range("2025-01-01", periods=4, freq="D"))
    fitted = NaiveSpec().fit(y)
    store = FitStore(tmp_path / "cache", max_bytes=10_000_000)
    assert store.load(key("naive")).result == "miss"
    assert store.save(key("naive"), fitted)
    # A new store on the same directory (a restart) finds it.
    again = FitStore(tmp_path / "cache", max_bytes=10_000_000).load(key("naive"))
    assert again.hit
    a = fitted.forecast(3, [0.8])
    b = again.value.forecast(3, [0.8])
    assert a.point.tobytes() == b.point.tobytes()
    assert a.intervals[0].upper.tobytes() == b.intervals[0].upper.tobytes()


def test_directory_is_created_private(tmp_path: Path) -> None:
    target = tmp_path / "a" / "b"
    FitStore(target, max_bytes=1000)
    assert target.stat().st_mode & 0o777 == 0o700
    loose = tmp_path / "loose"
    loose.mkdir(mode=0o777)
    loose.chmod(0o777)
    prepare_directory(loose)
    assert loose.stat().st_mode & 0o777 == 0o700


@pytest.mark.parametrize("damage", ["truncate", "garbage", "empty"])
def test_corrupt_entry_is_an_error_then_replaced(tmp_path: Path, damage: str) -> None:
    store = FitStore(tmp_path, max_bytes=10_000_000)
    store.save(key("x"), {"parameters": list(range(1000))})
    [path] = list(tmp_path.glob("*/*.joblib"))
    data = path.read_bytes()
    new = {"truncate": data[: len(data) // 2], "garbage": b"not a pickle" * 10, "empty": b""}
    path.write_bytes(new[damage])
    assert store.load(key("x")).result == "error"
    assert not path.exists()
    assert store.load(key("x")).result == "miss"
    store.save(key("x"), {"parameters": [1]})
    assert store.load(key("x")).value == {"parameters": [1]}


def test_entry_under_a_wrong_name_is_not_served(tmp_path: Path) -> None:
    store = FitStore(tmp_path, max_bytes=10_000_000)
    store.save(key("x"), "X")
    source = next(tmp_path.glob("*/*.joblib"))
    target = store._path(key("y"))
    target.parent.mkdir(exist_ok=True)
    os.replace(source, target)
    assert store.load(key("y")).result == "error"


def test_eviction_removes_the_oldest_used_first(tmp_path: Path) -> None:
    probe = FitStore(tmp_path / "probe", max_bytes=10**9)
    probe.save(key("p"), b"x" * 1000)
    size = probe.size_bytes
    store = FitStore(tmp_path / "store", max_bytes=int(size * 3.5))
    for name in "abc":
        store.save(key(name), b"x" * 1000)
    # Make "a" the most recently used: with file times in whole seconds on some systems,
    # set them explicitly rather than relying on the clock.
    for offset, name in enumerate("bca"):
        path = store._path(key(name))
        os.utime(path, (1_000_000 + offset, 1_000_000 + offset))
    store.save(key("d"), b"x" * 1000)
    # Checking file existence, not load(): a load counts as a use and would reorder.
    present = {name: store._path(key(name)).exists() for name in "abcd"}
    assert present == {"a": True, "b": False, "c": True, "d": True}
    store.save(key("e"), b"x" * 1000)
    assert not store._path(key("c")).exists()
    assert store.load(key("a")).hit and store.load(key("e")).hit
    assert store.size_bytes <= store.max_bytes


def test_uncreatable_directory_degrades_with_a_warning(
    tmp_path: Path, caplog: pytest.LogCaptureFixture
) -> None:
    # Tests run as root, so chmod cannot make a directory read-only: put it under a file.
    blocker = tmp_path / "file"
    blocker.write_text("not a directory")
    with caplog.at_level(logging.WARNING, logger="windvane.cache"):
        cache = Cache(
            enabled=True,
            directory=blocker / "cache",
            max_bytes=1000,
            response_entries=10,
            response_bytes=1000,
        )
    assert "not usable" in caplog.text
    state = cache.state()
    assert state.enabled and state.degraded is not None
    assert not cache.save_fitted(key("x"), "X")
    assert cache.load_fitted(key("x")).result == "miss"
    # The memory level still works.
    cache.put_response(key("r"), "R", 1)
    assert cache.get_response(key("r")).hit


def test_full_disk_during_a_write_degrades(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch, caplog: pytest.LogCaptureFixture
) -> None:
    store = FitStore(tmp_path, max_bytes=10_000_000)

    def no_space(*args: object, **kwargs: object) -> None:
        raise OSError(28, "No space left on device")

    monkeypatch.setattr("service.runtime.cache.joblib.dump", no_space)
    with caplog.at_level(logging.WARNING, logger="windvane.cache"):
        assert not store.save(key("x"), "X")
    assert store.degraded is not None and "No space" in store.degraded
    assert "not writable" in caplog.text
    assert not list(tmp_path.glob("*/.tmp-*"))


def test_unpicklable_value_is_skipped_not_fatal(tmp_path: Path) -> None:
    store = FitStore(tmp_path, max_bytes=10_000_000)
    assert not store.save(key("x"), lambda: 1)
    assert store.usable


def test_switched_off_cache_never_hits(tmp_path: Path) -> None:
    cache = Cache(
        enabled=False,
        directory=tmp_path / "never",
        max_bytes=1000,
        response_entries=10,
        response_bytes=1000,
    )
    cache.put_response(key("r"), "R", 1)
    assert cache.get_response(key("r")).result == "miss"
    assert not cache.save_fitted(key("x"), "X")
    assert not (tmp_path / "never").exists()
    assert not cache.state().enabled
