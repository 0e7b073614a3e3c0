"""Cache keys: canonical bytes make equal inputs equal and any change a new key."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from service.runtime.keys import (
    KeyBuilder,
    canonical_json,
    data_key,
    fit_key,
    float64_bytes,
    runtime_versions,
    timestamp_bytes,
)


def weekly(values: list[float | None], unit: str = "s", tz: str | None = None) -> pd.Series:
    index = pd.date_range("2025-01-06", periods=len(values), freq="W-MON", tz=tz, unit=unit)
    return pd.Series(np.array(values, dtype=float), index=index)


SPEC = {"family": "ets", "error": "add", "trend": "add", "damped": True}


def test_same_data_and_specification_give_the_same_key() -> None:
    a = fit_key(weekly([1.0, 2.0, 3.0]), 1, SPEC, {"search": "stepwise"})
    b = fit_key(weekly([1.0, 2.0, 3.0]), 1, dict(reversed(SPEC.items())), {"search": "stepwise"})
    assert a == b
    assert len(a.digest) == 64
    assert a.label == f"sha256:{a.digest}"


def test_timestamp_unit_does_not_change_the_key() -> None:
    # pandas 3 parses ISO dates at second or microsecond resolution: keys must use ns anyway.
    seconds = weekly([1.0, 2.0, 3.0], unit="s")
    nanoseconds = weekly([1.0, 2.0, 3.0], unit="ns")
    assert timestamp_bytes(seconds.index) == timestamp_bytes(nanoseconds.index)
    assert data_key(seconds) == data_key(nanoseconds)
    first = np.frombuffer(timestamp_bytes(seconds.index), dtype="<i8")[0]
    assert first == pd.Timestamp("2025-01-06").value


@pytest.mark.parametrize(
    "change",
    [
        lambda: (weekly([1.0, 2.0, 3.5]), 1, SPEC, {}),
        lambda: (weekly([1.0, 2.0, 3.0], tz="Europe/Paris"), 1, SPEC, {}),
        lambda: (weekly([1.0, 2.0, 3.0]), 52, SPEC, {}),
        lambda: (weekly([1.0, 2.0, 3.0]), 1, {**SPEC, "damped": False}, {}),
        lambda: (weekly([1.0, 2.0, 3.0]), 1, SPEC, {"transform": "log"}),
        lambda: (weekly([1.0, None, 3.0]), 1, SPEC, {}),
    ],
    ids=["value", "timezone", "season", "specification", "fit-options", "missing"],
)
def test_any_change_gives_another_key(change) -> None:
    base = fit_key(weekly([1.0, 2.0, 3.0]), 1, SPEC, {})
    assert fit_key(*change()) != base


def test_frequency_is_part_of_the_key() -> None:
    values = np.array([1.0, 2.0, 3.0])
    daily = pd.Series(values, index=pd.date_range("2025-01-06", periods=3, freq="D"))
    as_business = daily.copy()
    as_business.index = pd.DatetimeIndex(daily.index, freq="B")
    assert data_key(daily) != data_key(as_business)


def test_every_nan_hashes_alike() -> None:
    quiet = np.array([np.nan])
    other = np.frombuffer(np.uint64(0x7FF8000000000001).tobytes(), dtype="<f8")
    assert np.isnan(other[0])
    assert float64_bytes(quiet) == float64_bytes(other)


def test_parts_are_framed_so_boundaries_matter() -> None:
    a = KeyBuilder("x").text("a", "bc").text("d", "").finish()
    b = KeyBuilder("x").text("a", "b").text("d", "c").finish()
    assert a != b


def test_versions_enter_the_key(monkeypatch: pytest.MonkeyPatch) -> None:
    before = fit_key(weekly([1.0, 2.0]), 1, SPEC)
    patched = {**runtime_versions(), "statsmodels": "99.0"}
    monkeypatch.setattr("service.runtime.keys.runtime_versions", lambda: patched)
    assert fit_key(weekly([1.0, 2.0]), 1, SPEC) != before


def test_canonical_json_is_sorted_compact_and_total() -> None:
    assert canonical_json({"b": 1, "a": (1, 2.5)}) == b'{"a":[1,2.5],"b":1}'
    assert canonical_json({"x": float("nan")}) == b'{"x":"float:nan"}'
    assert canonical_json({"n": np.int64(3)}) == b'{"n":3}'


def test_versions_name_the_numerical_libraries() -> None:
    versions = runtime_versions()
    assert {"windvane", "python", "numpy", "pandas", "scipy", "statsmodels"} <= set(versions)


def test_a_series_without_timestamps_is_refused() -> None:
    with pytest.raises(TypeError):
        KeyBuilder("x").series(pd.Series([1.0, 2.0]))
