"""Sealed cache entries on disk, shared by HTTP processes, replicas and restarts.

Every entry is sealed (``runtime/sealed.py``) and written atomically in a 0700 directory,
bounded in bytes with the oldest-used evicted first. The disk never fails a request and
never turns itself off for good: a bad entry is deleted and reported as ``error`` (the caller
recomputes), a failed write marks the store degraded and is tried again after
``RETRY_SECONDS``. A claim file lock lets one process compute a key while others wait.
"""

from __future__ import annotations

import contextlib
import fcntl
import logging
import os
import tempfile
import threading
import time
from collections import OrderedDict
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Generic, Literal, TypeVar

from service.runtime.keys import Key
from service.runtime.sealed import BadEntry, Opened, Sealer

log = logging.getLogger("windvane.cache")

V = TypeVar("V")
Result = Literal["hit", "miss", "error"]

_SUFFIX = ".entry"
_CLAIMS = "claims"
# Evict down to this share of the bound, so a full store does not evict on every write.
_EVICT_TO = 0.9
# After a failed write, writes wait this long before being tried again.
RETRY_SECONDS = 30.0


@dataclass(frozen=True)
class Lookup(Generic[V]):
    """One cache read: ``hit`` with its value, ``miss``, or ``error`` (a bad entry)."""

    result: Result
    value: V | None = None
    layer: str = "memory"

    @property
    def hit(self) -> bool:
        """True when a value was found."""
        return self.result == "hit"


@dataclass(frozen=True)
class Claim:
    """The right to compute one key across processes (see ``DiskStore.claim``)."""

    held: bool
    handle: int | None = None
    path: Path | None = None

    def release(self) -> None:
        """Give the claim up: the answer is stored, or computing it failed."""
        if self.handle is None:
            return
        with contextlib.suppress(OSError):
            if self.path is not None:
                self.path.unlink()
        with contextlib.suppress(OSError):
            fcntl.flock(self.handle, fcntl.LOCK_UN)
        with contextlib.suppress(OSError):
            os.close(self.handle)


class DiskStore:
    """Sealed entries in a 0700 directory, bounded in bytes, oldest-used evicted first.

    Reads go on whatever happens to writes (a read-only volume still serves its entries);
    a failed write marks the store degraded and later writes wait ``retry_seconds`` before
    trying again, so a full or read-only disk costs one failed attempt per interval.
    """

    def __init__(
        self, directory: Path, max_bytes: int, sealer: Sealer, retry_seconds: float = RETRY_SECONDS
    ) -> None:
        self.directory = directory
        self.max_bytes = max_bytes
        self.sealer = sealer
        self.retry_seconds = retry_seconds
        self.degraded: str | None = None
        self._retry_at = 0.0
        self._lock = threading.Lock()
        # digest -> (bytes, last use); ordered oldest-used first.
        self._index: OrderedDict[str, tuple[int, float]] = OrderedDict()
        self._bytes = 0
        try:
            prepare_directory(directory)
            self._scan()
        except OSError as exc:
            self._failed(f"cache directory {directory} is not usable: {exc}")

    def read(self, key: Key) -> Lookup[Opened]:
        """The checked entry under ``key``; a bad one is deleted and reported as ``error``."""
        path = self._path(key)
        try:
            data = path.read_bytes()
        except FileNotFoundError:
            return Lookup("miss", layer="disk")
        except OSError as exc:
            log.warning("cannot read cache entry %s: %s", path.name, exc.strerror)
            return Lookup("miss", layer="disk")
        try:
            opened = self.sealer.open(key.digest, data)
        except BadEntry as exc:
            log.warning("discarding cache entry %s: %s", path.name, exc)
            self.discard(key)
            return Lookup("error", layer="disk")
        self._touch(key, path, len(data))
        return Lookup("hit", opened, layer="disk")

    def write(self, key: Key, kind: str, payload: bytes, meta: dict[str, Any]) -> bool:
        """Seal and write atomically; a failure degrades the store until a retry succeeds."""
        if self.degraded is not None and time.monotonic() < self._retry_at:
            return False
        path = self._path(key)
        try:
            prepare_directory(self.directory)
            path.parent.mkdir(mode=0o700, exist_ok=True)
            size = write_atomically(path, self.sealer.seal(key.digest, kind, payload, meta))
        except OSError as exc:
            self._failed(f"cache directory {self.directory} is not writable: {exc}")
            return False
        if self.degraded is not None:
            log.warning("cache directory %s is writable again", self.directory)
            self.degraded = None
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

    def claim(self, key: Key) -> Claim:
        """Try to become the one process computing ``key``: an exclusive lock on a file
        beside the entries (released by the kernel if this process dies). ``held`` is False
        while another process holds it; a directory that cannot be locked claims freely."""
        path = self.directory / _CLAIMS / f"{key.digest}.lock"
        try:
            path.parent.mkdir(mode=0o700, parents=True, exist_ok=True)
            handle = os.open(path, os.O_RDWR | os.O_CREAT, 0o600)
        except OSError:
            return Claim(True)
        try:
            fcntl.flock(handle, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except OSError:
            os.close(handle)
            return Claim(False)
        return Claim(True, handle, path)

    def discard(self, key: Key) -> None:
        """Remove the entry under ``key`` if there is one."""
        with contextlib.suppress(OSError):
            self._path(key).unlink()
        with self._lock:
            item = self._index.pop(key.digest, None)
            if item is not None:
                self._bytes -= item[0]

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

    def _failed(self, reason: str) -> None:
        if self.degraded is None:
            log.warning("%s; writes will be tried again in %g s", reason, self.retry_seconds)
        self.degraded = reason
        self._retry_at = time.monotonic() + self.retry_seconds

    def _touch(self, key: Key, path: Path, size: int) -> None:
        now = time.time()
        # The file time carries "last used" across restarts and across processes sharing
        # the directory; failing to set it only makes eviction order less exact.
        with contextlib.suppress(OSError):
            os.utime(path, (now, now))
        with self._lock:
            item = self._index.pop(key.digest, None)
            self._index[key.digest] = (size, now)
            self._bytes += size - (item[0] if item is not None else 0)

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
        with contextlib.suppress(OSError):
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
            self.discard(Key(digest))


def prepare_directory(directory: Path) -> None:
    """Create the cache directory 0700 and make it private if it is not."""
    directory.mkdir(mode=0o700, parents=True, exist_ok=True)
    if directory.stat().st_mode & 0o077:
        directory.chmod(0o700)


def write_atomically(path: Path, data: bytes) -> int:
    """Write to a temporary file beside ``path`` and rename it over, so readers never see half."""
    handle, temporary = tempfile.mkstemp(dir=path.parent, prefix=".tmp-", suffix=_SUFFIX)
    try:
        with os.fdopen(handle, "wb") as out:
            out.write(data)
        os.replace(temporary, path)
    except BaseException:
        with contextlib.suppress(OSError):
            os.unlink(temporary)
        raise
    return len(data)
