"""The cache layers: LRU bounds, sealed disk entries, tampering, bad entries and directories."""

from __future__ import annotations

import logging
import os
import pickle
from pathlib import Path

import pandas as pd
import pytest

from service.core.models.naive import NaiveSpec
from service.runtime.cache import Cache, ResponseCache, StoredResponse
from service.runtime.disk import DiskStore, prepare_directory
from service.runtime.keys import Key, KeyBuilder
from service.runtime.sealed import MAGIC, BadEntry, Sealer

SECRET = b"a test secret"


def key(name: str) -> Key:
    return KeyBuilder("test").text("name", name).finish()


def cache_at(directory: Path, secret: bytes | None = SECRET, **overrides: object) -> Cache:
    values: dict[str, object] = {
        "enabled": True,
        "directory": directory,
        "max_bytes": 10_000_000,
        "response_entries": 10,
        "response_bytes": 1_000_000,
        "secret": secret,
    }
    values.update(overrides)
    return Cache(**values)  # type: ignore[arg-type]


def store_at(directory: Path, max_bytes: int = 10_000_000) -> DiskStore:
    return DiskStore(directory, max_bytes, Sealer(SECRET))


def stored(text: str = "x") -> StoredResponse:
    return StoredResponse(b'{"a":"' + text.encode() + b'","cache":"', b'"}', "Naive", 4)


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


def test_a_stored_response_fills_its_gap() -> None:
    assert stored().body("hit") == b'{"a":"x","cache":"hit"}'
    assert stored().body("miss") == b'{"a":"x","cache":"miss"}'


def test_fitted_model_round_trips_through_disk(tmp_path: Path) -> None:
    y = pd.Series([1.0, 3.0, 2.0, 5.0], index=pd.date_range("2025-01-01", periods=4, freq="D"))
    fitted = NaiveSpec().fit(y)
    cache = cache_at(tmp_path / "cache")
    assert cache.load_fitted(key("naive")).result == "miss"
    # Stored as the pickle a worker made, and returned as those bytes: the server never
    # unpickles a fitted model (a worker does: jobs.forecast_stored).
    assert cache.save_fitted(key("naive"), pickle.dumps(fitted))
    # A new cache on the same directory with the same secret (a restart) finds it.
    again = cache_at(tmp_path / "cache").load_fitted(key("naive"))
    assert again.hit and isinstance(again.value, bytes)
    a = fitted.forecast(3, [0.8])
    b = pickle.loads(again.value).forecast(3, [0.8])
    assert a.point.tobytes() == b.point.tobytes()
    assert a.intervals[0].upper.tobytes() == b.intervals[0].upper.tobytes()


def test_a_response_round_trips_through_disk_and_memory(tmp_path: Path) -> None:
    cache = cache_at(tmp_path)
    assert cache.save_response(key("r"), stored("é"))
    other = cache_at(tmp_path)  # another process or a restart: memory is empty
    assert other.get_response(key("r")).result == "miss"
    found = other.load_response(key("r"))
    assert found.hit and found.layer == "disk" and found.value == stored("é")
    assert other.get_response(key("r")).hit


class Planted:
    """Unpickling this runs a command: what a planted entry would do."""

    def __reduce__(self) -> tuple[object, tuple[str]]:
        return (os.system, ("touch planted-ran",))


def test_a_planted_pickle_is_refused_and_never_loaded(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    monkeypatch.chdir(tmp_path)
    cache = cache_at(tmp_path / "cache")
    cache.save_fitted(key("x"), b"model 1")
    [path] = list((tmp_path / "cache").glob("*/*.entry"))
    # An attacker without the secret: a valid-looking header over their own payload.
    forged = Sealer(b"the attacker's guess").seal(
        key("x").digest, "pickle", pickle.dumps(Planted()), {}
    )
    path.write_bytes(forged)
    assert cache.load_fitted(key("x")).result == "error"
    assert not (tmp_path / "planted-ran").exists()
    assert not path.exists()  # deleted, so the next request recomputes and rewrites it
    assert cache.save_fitted(key("x"), b"model 2")
    assert cache.load_fitted(key("x")).value == b"model 2"


def test_an_edited_payload_fails_its_keyed_hash(tmp_path: Path) -> None:
    cache = cache_at(tmp_path)
    cache.save_response(key("r"), stored("1"))
    [path] = list(tmp_path.glob("*/*.entry"))
    path.write_bytes(path.read_bytes().replace(b'"a":"1"', b'"a":"9"'))
    assert cache_at(tmp_path).load_response(key("r")).result == "error"
    assert not path.exists()


def test_without_a_secret_responses_are_checked_and_pickles_stay_in_the_process(
    tmp_path: Path,
) -> None:
    writer = cache_at(tmp_path, secret=None)
    writer.save_response(key("r"), stored())
    writer.save_fitted(key("f"), b"model")
    reader = cache_at(tmp_path, secret=None)
    assert reader.load_response(key("r")).hit  # plain JSON with its checksum
    assert reader.load_fitted(key("f")).result == "error"  # another random secret
    assert writer.load_fitted(key("r")).result == "error"  # a response is not a model
    # A configured secret does not accept an entry that is only checksummed.
    writer.save_response(key("s"), stored())
    assert cache_at(tmp_path).load_response(key("s")).result == "error"


def test_directory_is_created_private(tmp_path: Path) -> None:
    target = tmp_path / "a" / "b"
    store_at(target, max_bytes=1000)
    assert target.stat().st_mode & 0o777 == 0o700
    loose = tmp_path / "loose"
    loose.mkdir(mode=0o777)
    loose.chmod(0o777)
    prepare_directory(loose)
    assert loose.stat().st_mode & 0o777 == 0o700


@pytest.mark.parametrize("damage", ["truncate", "garbage", "empty", "header"])
def test_corrupt_entry_is_an_error_then_replaced(tmp_path: Path, damage: str) -> None:
    cache = cache_at(tmp_path)
    cache.save_fitted(key("x"), pickle.dumps(list(range(1000))))
    [path] = list(tmp_path.glob("*/*.entry"))
    data = path.read_bytes()
    new = {
        "truncate": data[: len(data) // 2],
        "garbage": b"not an entry" * 10,
        "empty": b"",
        "header": MAGIC + b"{not json\n" + data[len(MAGIC) :],
    }
    path.write_bytes(new[damage])
    assert cache.load_fitted(key("x")).result == "error"
    assert not path.exists()
    assert cache.load_fitted(key("x")).result == "miss"
    cache.save_fitted(key("x"), b"model")
    assert cache.load_fitted(key("x")).value == b"model"
    assert cache.state().degraded is None  # a bad entry never turns the store off


def test_entry_under_a_wrong_name_is_not_served(tmp_path: Path) -> None:
    store = store_at(tmp_path)
    store.write(key("x"), "json", b"X", {})
    source = next(tmp_path.glob("*/*.entry"))
    target = store._path(key("y"))
    target.parent.mkdir(exist_ok=True)
    os.replace(source, target)
    assert store.read(key("y")).result == "error"
    with pytest.raises(BadEntry):
        Sealer(SECRET).open(key("y").digest, Sealer(SECRET).seal(key("x").digest, "json", b"", {}))


def test_eviction_removes_the_oldest_used_first(tmp_path: Path) -> None:
    probe = store_at(tmp_path / "probe", max_bytes=10**9)
    probe.write(key("p"), "json", b"x" * 1000, {})
    size = probe.size_bytes
    store = store_at(tmp_path / "store", max_bytes=int(size * 3.5))
    for name in "abc":
        store.write(key(name), "json", b"x" * 1000, {})
    # Make "a" the most recently used: with file times in whole seconds on some systems,
    # set them explicitly rather than relying on the clock.
    for offset, name in enumerate("bca"):
        path = store._path(key(name))
        os.utime(path, (1_000_000 + offset, 1_000_000 + offset))
    store.write(key("d"), "json", b"x" * 1000, {})
    # Checking file existence, not read(): a read counts as a use and would reorder.
    present = {name: store._path(key(name)).exists() for name in "abcd"}
    assert present == {"a": True, "b": False, "c": True, "d": True}
    store.write(key("e"), "json", b"x" * 1000, {})
    assert not store._path(key("c")).exists()
    assert store.read(key("a")).hit and store.read(key("e")).hit
    assert store.size_bytes <= store.max_bytes


def test_uncreatable_directory_degrades_and_heals(
    tmp_path: Path, caplog: pytest.LogCaptureFixture
) -> None:
    # Tests run as root, so chmod cannot make a directory read-only: put it under a file.
    blocker = tmp_path / "file"
    blocker.write_text("not a directory")
    with caplog.at_level(logging.WARNING, logger="windvane.cache"):
        cache = cache_at(blocker / "cache", retry_seconds=0.0)
    assert "not usable" in caplog.text
    state = cache.state()
    assert state.enabled and state.degraded is not None
    assert not cache.save_fitted(key("x"), b"X")
    assert cache.load_fitted(key("x")).result == "miss"
    # The memory layer still works.
    cache.put_response(key("r"), stored())
    assert cache.get_response(key("r")).hit
    # Once the directory can be made, the next write succeeds and the store is healthy.
    blocker.unlink()
    assert cache.save_fitted(key("x"), b"X")
    assert cache.state().degraded is None
    assert cache.load_fitted(key("x")).value == b"X"


def test_a_failed_write_is_tried_again_later(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch, caplog: pytest.LogCaptureFixture
) -> None:
    store = DiskStore(tmp_path, 10_000_000, Sealer(SECRET), retry_seconds=3600.0)
    real = os.replace

    def no_space(*args: object, **kwargs: object) -> None:
        raise OSError(28, "No space left on device")

    monkeypatch.setattr("service.runtime.disk.os.replace", no_space)
    with caplog.at_level(logging.WARNING, logger="windvane.cache"):
        assert not store.write(key("x"), "json", b"X", {})
    assert store.degraded is not None and "No space" in store.degraded
    assert "not writable" in caplog.text
    assert not list(tmp_path.glob("*/.tmp-*"))
    monkeypatch.setattr("service.runtime.disk.os.replace", real)
    assert not store.write(key("x"), "json", b"X", {})  # still waiting to retry
    store._retry_at = 0.0  # the retry interval has passed
    assert store.write(key("x"), "json", b"X", {})
    assert store.degraded is None and store.read(key("x")).hit


def test_switched_off_cache_never_hits(tmp_path: Path) -> None:
    cache = cache_at(tmp_path / "never", enabled=False)
    cache.put_response(key("r"), stored())
    assert cache.get_response(key("r")).result == "miss"
    assert not cache.save_fitted(key("x"), b"X")
    assert not cache.save_response(key("r"), stored())
    assert not (tmp_path / "never").exists()
    assert not cache.state().enabled


def test_one_process_at_a_time_claims_a_key(tmp_path: Path) -> None:
    first, second = store_at(tmp_path), store_at(tmp_path)  # as two processes would
    held = first.claim(key("k"))
    assert held.held
    assert not second.claim(key("k")).held
    assert second.claim(key("other")).held
    held.release()
    again = second.claim(key("k"))
    assert again.held
    again.release()
