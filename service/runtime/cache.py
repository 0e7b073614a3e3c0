"""The two cache layers: finished responses (memory and disk) and fitted models (disk).

Layer 1 holds finished responses as JSON bytes, keyed by the request itself (before any
series parsing), in an in-process LRU and on disk, so that HTTP processes, replicas sharing
the directory and restarts reuse them. Layer 2 holds fitted models (specification and
parameters, designed to pickle small) keyed by data, specification and fit options, so a new
horizon or coverage needs no refit. The disk side (sealing, eviction, claims, retrying a
failed write) is ``runtime/disk.py``. A fitted model is stored and returned as the pickle a
pool worker made; only a worker loads it (``jobs.forecast_stored``), and only after its seal
verified here, so the server never imports a family's implementation to keep one.
"""

from __future__ import annotations

import logging
import threading
from collections import OrderedDict
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Generic, TypeVar

from service.runtime.disk import RETRY_SECONDS, Claim, DiskStore, Lookup
from service.runtime.keys import Key
from service.runtime.sealed import BadEntry, Opened, Sealer

__all__ = ["Cache", "CacheState", "Claim", "Lookup", "ResponseCache", "StoredResponse"]

log = logging.getLogger("windvane.cache")

V = TypeVar("V")


@dataclass(frozen=True)
class StoredResponse:
    """A finished response as JSON bytes, ``head + cache state + tail``.

    ``provenance.cache`` is the only part that differs between the answer that computed it
    (``miss``) and later hits, so it is left as a gap filled in per request: a hit is then
    two byte concatenations, with no parsing and no serialization.
    """

    head: bytes
    tail: bytes
    label: str | None = None
    observations: int | None = None

    def body(self, state: str) -> bytes:
        """The response bytes with ``provenance.cache`` set to ``state``."""
        return b"".join((self.head, state.encode(), self.tail))

    @property
    def size(self) -> int:
        """Bytes held."""
        return len(self.head) + len(self.tail) + 200

    def meta(self) -> dict[str, Any]:
        """What the disk entry keeps beside the bytes."""
        return {"gap": len(self.head), "label": self.label, "observations": self.observations}

    @classmethod
    def from_entry(cls, opened: Opened) -> StoredResponse:
        """Rebuild from a checked disk entry; BadEntry when its metadata does not fit."""
        gap = opened.meta.get("gap")
        if opened.kind != "json" or not isinstance(gap, int) or not 0 < gap < len(opened.payload):
            raise BadEntry("not a stored response")
        label, observations = opened.meta.get("label"), opened.meta.get("observations")
        return cls(
            opened.payload[:gap],
            opened.payload[gap:],
            label if isinstance(label, str) else None,
            observations if isinstance(observations, int) else None,
        )


@dataclass(frozen=True)
class CacheState:
    """What /readyz reports: whether each level is on and, if the disk is failing, why."""

    enabled: bool
    responses: int
    disk_entries: int
    disk_bytes: int
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


def _pickled(opened: Opened) -> bytes:
    """The pickled fitted model of a checked entry (never called on one that failed its seal)."""
    if opened.kind != "pickle":
        raise BadEntry("not a fitted model")
    return opened.payload


class Cache:
    """Both layers behind one switch: ``enabled=False`` (``WINDVANE_CACHE=off``) never hits."""

    def __init__(
        self,
        *,
        enabled: bool,
        directory: Path,
        max_bytes: int,
        response_entries: int,
        response_bytes: int,
        secret: bytes | None = None,
        retry_seconds: float = RETRY_SECONDS,
    ) -> None:
        self.enabled = enabled
        self.responses: ResponseCache[StoredResponse] = ResponseCache(
            response_entries, response_bytes
        )
        self.disk: DiskStore | None = (
            DiskStore(directory, max_bytes, Sealer(secret), retry_seconds) if enabled else None
        )

    def get_response(self, key: Key) -> Lookup[StoredResponse]:
        """A finished response from memory (cheap: safe on the event loop)."""
        return self.responses.get(key) if self.enabled else Lookup("miss")

    def put_response(self, key: Key, value: StoredResponse) -> None:
        """Keep a finished response in memory."""
        if self.enabled:
            self.responses.put(key, value, value.size)

    def load_response(self, key: Key) -> Lookup[StoredResponse]:
        """A finished response from disk, kept in memory too (blocking: off the event loop)."""
        found = self._load(key, StoredResponse.from_entry)
        if found.hit and found.value is not None:
            self.put_response(key, found.value)
        return found

    def save_response(self, key: Key, value: StoredResponse) -> bool:
        """Persist a finished response as plain JSON bytes (blocking: off the event loop)."""
        if self.disk is None:
            return False
        return self.disk.write(key, "json", value.head + value.tail, value.meta())

    def load_fitted(self, key: Key) -> Lookup[bytes]:
        """A pickled fitted model from disk, returned only once its seal verifies (blocking)."""
        return self._load(key, _pickled)

    def claim(self, key: Key) -> Claim:
        """Claim the computing of ``key`` across processes (blocking: off the event loop)."""
        return self.disk.claim(key) if self.disk is not None else Claim(True)

    def save_fitted(self, key: Key, payload: bytes) -> bool:
        """Persist a pickled fitted model, sealed (blocking: call it off the event loop)."""
        if self.disk is None:
            return False
        return self.disk.write(key, "pickle", payload, {})

    def _load(self, key: Key, decode: Callable[[Opened], V]) -> Lookup[V]:
        """Read, check and decode an entry; one that fails to decode is deleted."""
        if self.disk is None:
            return Lookup("miss", layer="disk")
        found = self.disk.read(key)
        if not found.hit or found.value is None:
            return Lookup(found.result, layer="disk")
        try:
            return Lookup("hit", decode(found.value), layer="disk")
        except Exception as exc:  # authentic but unusable (a class changed): recompute
            log.warning("discarding cache entry %s: %s", key.digest, exc)
            self.disk.discard(key)
            return Lookup("error", layer="disk")

    def state(self) -> CacheState:
        """The layers' sizes and any degradation, for /readyz."""
        disk = self.disk
        return CacheState(
            enabled=self.enabled,
            responses=len(self.responses) if self.enabled else 0,
            disk_entries=disk.entries if disk is not None else 0,
            disk_bytes=disk.size_bytes if disk is not None else 0,
            directory=str(disk.directory) if disk is not None else None,
            degraded=disk.degraded if disk is not None else None,
        )
