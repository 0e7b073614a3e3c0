"""The two cache levels: finished responses in memory, fitted models on disk with joblib.

A response is keyed by the whole request and kept in an in-process LRU; a fitted model
(specification + parameters, designed to pickle small) is keyed by data, specification and
fit options and persisted under a 0700 directory, so a new horizon or coverage needs no
refit. The disk level never fails a request: a bad entry is a miss, a bad directory turns
the level off with a warning.
"""

from __future__ import annotations

import contextlib
import logging
import os
import tempfile
import threading
import time
from collections import OrderedDict
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Generic, Literal, TypeVar

import joblib

from service.runtime.keys import Key

log = logging.getLogger("windvane.cache")

V = TypeVar("V")
Result = Literal["hit", "miss", "error"]

_SUFFIX = ".joblib"
# Evict down to this share of the bound, so a full store does not evict on every write.
_EVICT_TO = 0.9


@dataclass(frozen=True)
class Lookup(Generic[V]):
    """One cache read: ``hit`` with its value, ``miss``, or ``error`` (a bad entry)."""

    result: Result
    value: V | None = None

    @property
    def hit(self) -> bool:
        """True when a value was found."""
        return self.result == "hit"


@dataclass(frozen=True)
class CacheState:
    """What /readyz reports: whether each level is on and, if the disk level is off, why."""

    enabled: bool
    responses: int
    fitted_entries: int
    fitted_bytes: int
    directory: str | None
    degraded: str | None


class ResponseCache(Generic[V]):
    """An in-process LRU of finished responses, bounded in entries and in bytes."""

    def __init__(self, max_entries: int, max_bytes: int) -> None:
        self.max_entries = max_entries
        self.max_bytes = max_bytes
        self._items: OrderedDict[str, tuple[V, int]] = OrderedDict()
        self._bytes = 0
        self._lock = threading.Lock()

    def get(self, key: Key) -> Lookup[V]:
        """The stored response for ``key``, refreshed as most recently used."""
        with self._lock:
            item = self._items.get(key.digest)
            if item is None:
                return Lookup("miss")
            self._items.move_to_end(key.digest)
            return Lookup("hit", item[0])

    def put(self, key: Key, value: V, size: int) -> bool:
        """Store ``value`` (``size`` bytes); False when it alone exceeds the byte bound."""
        if size > self.max_bytes or self.max_entries <= 0:
            return False
        with self._lock:
            old = self._items.pop(key.digest, None)
            if old is not None:
                self._bytes -= old[1]
            self._items[key.digest] = (value, size)
            self._bytes += size
            while len(self._items) > self.max_entries or self._bytes > self.max_bytes:
                _, (_, dropped) = self._items.popitem(last=False)
                self._bytes -= dropped
        return True

    def __len__(self) -> int:
        return len(self._items)

    @property
    def size_bytes(self) -> int:
        """Bytes held, as reported by the callers of ``put``."""
        return self._bytes


class FitStore:
    """Fitted models persisted with joblib, bounded in bytes, oldest-used evicted first."""

    def __init__(self, directory: Path, max_bytes: int) -> None:
        self.directory = directory
        self.max_bytes = max_bytes
        self.degraded: str | None = None
        self._lock = threading.Lock()
        # digest -> (bytes, last use); ordered oldest-used first.
        self._index: OrderedDict[str, tuple[int, float]] = OrderedDict()
        self._bytes = 0
        try:
            prepare_directory(directory)
            self._scan()
        except OSError as exc:
            self._degrade(f"cache directory {directory} is not usable: {exc}")

    @property
    def usable(self) -> bool:
        """False once the directory proved unwritable: the store then does nothing."""
        return self.degraded is None

    def load(self, key: Key) -> Lookup[Any]:
        """The fitted model stored under ``key``; a corrupt entry is removed and reported."""
        if not self.usable:
            return Lookup("miss")
        path = self._path(key)
        try:
            entry = joblib.load(path)
        except FileNotFoundError:
            return Lookup("miss")
        except Exception as exc:  # any unpickling failure means a bad entry, never a 500
            log.warning("discarding unreadable cache entry %s: %s", path.name, exc)
            self._discard(key)
            return Lookup("error")
        if not isinstance(entry, dict) or entry.get("key") != key.digest:
            log.warning("discarding cache entry %s that belongs to another key", path.name)
            self._discard(key)
            return Lookup("error")
        self._touch(key, path)
        return Lookup("hit", entry["value"])

    def save(self, key: Key, value: Any) -> bool:
        """Persist ``value`` atomically; a failing disk turns the store off instead of raising."""
        if not self.usable:
            return False
        path = self._path(key)
        try:
            path.parent.mkdir(mode=0o700, exist_ok=True)
            size = _write_atomically(path, {"key": key.digest, "value": value})
        except OSError as exc:
            self._degrade(f"cache directory {self.directory} is not writable: {exc}")
            return False
        except Exception as exc:  # an object that will not pickle is skipped, not fatal
            log.warning("not caching a fitted model that cannot be stored: %s", exc)
            return False
        with self._lock:
            old = self._index.pop(key.digest, None)
            if old is not None:
                self._bytes -= old[0]
            self._index[key.digest] = (size, time.time())
            self._bytes += size
            over = self._bytes > self.max_bytes
        if over:
            self._evict()
        return True

    @property
    def entries(self) -> int:
        """Entries this process knows of."""
        return len(self._index)

    @property
    def size_bytes(self) -> int:
        """Bytes on disk this process knows of."""
        return self._bytes

    # --- internals ------------------------------------------------------------------
    def _path(self, key: Key) -> Path:
        return self.directory / key.digest[:2] / f"{key.digest}{_SUFFIX}"

    def _degrade(self, reason: str) -> None:
        if self.degraded is None:
            log.warning("%s; running without the fitted-model cache", reason)
        self.degraded = reason

    def _touch(self, key: Key, path: Path) -> None:
        now = time.time()
        # The file time carries "last used" across restarts and across processes sharing
        # the directory; failing to set it only makes eviction order less exact.
        with contextlib.suppress(OSError):
            os.utime(path, (now, now))
        with self._lock:
            item = self._index.pop(key.digest, None)
            size = item[0] if item is not None else _size_of(path)
            self._index[key.digest] = (size, now)
            if item is None:
                self._bytes += size

    def _discard(self, key: Key) -> None:
        with contextlib.suppress(OSError):
            self._path(key).unlink()
        with self._lock:
            item = self._index.pop(key.digest, None)
            if item is not None:
                self._bytes -= item[0]

    def _scan(self) -> None:
        """Rebuild the index from the disk (other processes may share the directory)."""
        found = []
        for path in self.directory.glob(f"*/*{_SUFFIX}"):
            try:
                stat = path.stat()
            except OSError:
                continue
            found.append((stat.st_mtime, path.name.removesuffix(_SUFFIX), stat.st_size))
        found.sort()
        with self._lock:
            self._index = OrderedDict((digest, (size, used)) for used, digest, size in found)
            self._bytes = sum(size for _, _, size in found)

    def _evict(self) -> None:
        self._scan()
        with self._lock:
            victims = []
            total = self._bytes
            for digest, (size, _) in self._index.items():
                if total <= self.max_bytes * _EVICT_TO:
                    break
                victims.append(digest)
                total -= size
        for digest in victims:
            self._discard(Key(digest))


def prepare_directory(directory: Path) -> None:
    """Create the cache directory 0700 (it holds pickles: trusted input) and prove it writable."""
    directory.mkdir(mode=0o700, parents=True, exist_ok=True)
    if directory.stat().st_mode & 0o077:
        directory.chmod(0o700)
    with tempfile.NamedTemporaryFile(dir=directory, prefix=".probe-"):
        pass


def _write_atomically(path: Path, entry: dict[str, Any]) -> int:
    """Dump to a temporary file beside ``path`` and rename it over, so readers never see half."""
    handle, temporary = tempfile.mkstemp(dir=path.parent, prefix=".tmp-", suffix=_SUFFIX)
    os.close(handle)
    try:
        joblib.dump(entry, temporary)
        os.replace(temporary, path)
    except BaseException:
        with contextlib.suppress(OSError):
            os.unlink(temporary)
        raise
    return _size_of(path)


def _size_of(path: Path) -> int:
    try:
        return path.stat().st_size
    except OSError:
        return 0


class Cache:
    """Both levels behind one switch: ``enabled=False`` (``WINDVANE_CACHE=off``) never hits."""

    def __init__(
        self,
        *,
        enabled: bool,
        directory: Path,
        max_bytes: int,
        response_entries: int,
        response_bytes: int,
    ) -> None:
        self.enabled = enabled
        self.responses: ResponseCache[Any] = ResponseCache(response_entries, response_bytes)
        self.fits: FitStore | None = FitStore(directory, max_bytes) if enabled else None

    def get_response(self, key: Key) -> Lookup[Any]:
        """A finished response for the whole request, from memory."""
        return self.responses.get(key) if self.enabled else Lookup("miss")

    def put_response(self, key: Key, value: Any, size: int) -> None:
        """Keep a finished response in memory."""
        if self.enabled:
            self.responses.put(key, value, size)

    def load_fitted(self, key: Key) -> Lookup[Any]:
        """A fitted model from disk (blocking file I/O: call it off the event loop)."""
        return self.fits.load(key) if self.fits is not None else Lookup("miss")

    def save_fitted(self, key: Key, value: Any) -> bool:
        """Persist a fitted model (blocking file I/O: call it off the event loop)."""
        return self.fits.save(key, value) if self.fits is not None else False

    def state(self) -> CacheState:
        """The levels' sizes and any degradation, for /readyz."""
        fits = self.fits
        return CacheState(
            enabled=self.enabled,
            responses=len(self.responses) if self.enabled else 0,
            fitted_entries=fits.entries if fits is not None else 0,
            fitted_bytes=fits.size_bytes if fits is not None else 0,
            directory=str(self.fits.directory) if self.fits is not None else None,
            degraded=self.fits.degraded if self.fits is not None else None,
        )
