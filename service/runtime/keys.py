"""Cache keys: SHA-256 over canonical bytes of a series, a specification and the options.

hashlib over the raw float64 and int64 buffers is what keeps a cache hit cheap (DESIGN,
'Measured facts'); every part is tagged and length-prefixed so two different inputs can
never concatenate to the same byte string.
"""

from __future__ import annotations

import hashlib
import json
import math
import platform
import struct
from collections.abc import Mapping
from dataclasses import dataclass
from functools import cache
from importlib.metadata import PackageNotFoundError, version
from typing import Any

import numpy as np
import pandas as pd

# Libraries whose numbers end up in a response: a new release may change them, so a
# release change must change every key.
NUMERICAL_LIBRARIES = ("numpy", "pandas", "scipy", "statsmodels")

# One bit pattern for every NaN, so a missing value hashes the same whatever produced it.
_CANONICAL_NAN = np.float64(np.nan)
# Items of a long list encoded per json.dumps call (see canonical_json).
_CHUNK = 2_048


@dataclass(frozen=True)
class Key:
    """A cache key: the hex SHA-256 digest of the canonical bytes."""

    digest: str

    @property
    def label(self) -> str:
        """The form shown to callers (``provenance.data_hash``): ``sha256:<hex>``."""
        return f"sha256:{self.digest}"


@cache
def runtime_versions() -> dict[str, str]:
    """The service's version and those of Python and its numerical libraries."""
    from service import __version__

    found = {"windvane": __version__, "python": platform.python_version()}
    for name in NUMERICAL_LIBRARIES:
        try:
            found[name] = version(name)
        except PackageNotFoundError:
            found[name] = "absent"
    return found


class KeyBuilder:
    """Accumulates tagged, length-prefixed parts into one SHA-256."""

    def __init__(self, purpose: str) -> None:
        self._hash = hashlib.sha256()
        self.text("purpose", purpose)

    def raw(self, tag: str, payload: bytes) -> KeyBuilder:
        """Add one part: its tag, its length, then its bytes."""
        name = tag.encode()
        self._hash.update(struct.pack("<I", len(name)) + name)
        self._hash.update(struct.pack("<Q", len(payload)))
        self._hash.update(payload)
        return self

    def text(self, tag: str, value: str) -> KeyBuilder:
        """Add a string part (UTF-8)."""
        return self.raw(tag, value.encode())

    def json(self, tag: str, value: Any) -> KeyBuilder:
        """Add a JSON part with sorted keys, so dict order never changes a key."""
        return self.raw(tag, canonical_json(value))

    def series(self, y: pd.Series) -> KeyBuilder:
        """Add a series: values as float64, timestamps as int64 ns (UTC), zone and frequency."""
        index = y.index
        if not isinstance(index, pd.DatetimeIndex):
            raise TypeError("a keyed series needs a DatetimeIndex")
        self.raw("values", float64_bytes(y.to_numpy(dtype=np.float64, na_value=np.nan)))
        self.raw("timestamps", timestamp_bytes(index))
        self.text("timezone", str(index.tz) if index.tz is not None else "")
        self.text("frequency", index.freqstr or "")
        return self

    def versions(self) -> KeyBuilder:
        """Add the service and numerical-library versions."""
        return self.json("versions", runtime_versions())

    def finish(self) -> Key:
        """The key of everything added so far."""
        return Key(self._hash.hexdigest())


def float64_bytes(values: np.ndarray) -> bytes:
    """Little-endian float64 bytes with every NaN made the same bit pattern."""
    array = np.ascontiguousarray(values, dtype="<f8")
    missing = np.isnan(array)
    if missing.any():
        array = array.copy()
        array[missing] = _CANONICAL_NAN
    return array.tobytes()


def timestamp_bytes(index: pd.DatetimeIndex) -> bytes:
    """Little-endian int64 nanoseconds since the epoch (UTC), whatever the index's unit."""
    nanoseconds = index.as_unit("ns").asi8
    return np.ascontiguousarray(nanoseconds, dtype="<i8").tobytes()


def canonical_json(value: Any) -> bytes:
    """Compact JSON with sorted keys; tuples become lists and floats keep their repr.

    Long lists are encoded ``_CHUNK`` items per call, to the same bytes: one ``json.dumps``
    of 100,000 values held the GIL for a fifth of a second, stalling the event loop even
    when called from a thread."""
    return _encoded(_plain(value)).encode()


def _encoded(value: Any) -> str:
    if isinstance(value, dict):
        items = sorted(value.items())
        return "{" + ",".join(_dumps(k) + ":" + _encoded(v) for k, v in items) + "}"
    if isinstance(value, list) and len(value) > _CHUNK:
        parts = (_encoded_items(value[i : i + _CHUNK]) for i in range(0, len(value), _CHUNK))
        return "[" + ",".join(parts) + "]"
    return _dumps(value)


def _encoded_items(items: list[Any]) -> str:
    return (
        ",".join(_encoded(v) for v in items)
        if any(isinstance(v, (dict, list)) for v in items)
        else _dumps(items)[1:-1]
    )


def _dumps(value: Any) -> str:
    return json.dumps(value, sort_keys=True, separators=(",", ":"), allow_nan=False)


def _plain(value: Any) -> Any:
    if isinstance(value, Mapping):
        return {str(k): _plain(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_plain(v) for v in value]
    if isinstance(value, float) and not math.isfinite(value):
        # JSON has no NaN; a tagged string keeps such options distinct and hashable.
        return f"float:{value!r}"
    if isinstance(value, np.generic):
        return _plain(value.item())
    return value


def data_key(y: pd.Series) -> Key:
    """The hash of the data alone (``provenance.data_hash``)."""
    return KeyBuilder("data").series(y).finish()


def fit_key(
    y: pd.Series,
    seasonal_period: int,
    specification: Any,
    fit_options: Mapping[str, Any] | None = None,
) -> Key:
    """Key of a fitted model: data, specification and fit options, never the horizon.

    ``specification`` is any JSON value: a specification's dict, or ``"auto"`` with its candidates.
    """
    return (
        KeyBuilder("fit")
        .series(y)
        .text("seasonal_period", str(int(seasonal_period)))
        .json("specification", specification)
        .json("fit_options", dict(fit_options or {}))
        .versions()
        .finish()
    )
