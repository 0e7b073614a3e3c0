"""Metric names, labels and exposition of the service's telemetry."""

from __future__ import annotations

import os
import shutil
import subprocess
from pathlib import Path

import pytest
from prometheus_client.parser import text_string_to_metric_families

from service.runtime.keys import runtime_versions
from service.runtime.telemetry import (
    MULTIPROCESS_ENV,
    MetricsDirectoryError,
    Telemetry,
    prepare_multiprocess,
)


def families(telemetry: Telemetry) -> dict[str, object]:
    text = telemetry.exposition().decode()
    return {f.name: f for f in text_string_to_metric_families(text)}


def sample(telemetry: Telemetry, name: str, **labels: str) -> float:
    registry_value = telemetry.registry.get_sample_value(name, labels)
    assert registry_value is not None, f"{name} {labels} not exposed"
    return registry_value


def recorded() -> Telemetry:
    t = Telemetry()
    t.record_request("/v1/forecasts", "POST", 200, 0.012)
    t.record_request("/v1/forecasts", "POST", 503, 2.0)
    t.record_cache("response", "hit")
    t.record_cache("fitted", "miss")
    t.record_cache("fitted", "strange")
    t.record_fit("ets", 0.3)
    t.record_fit_failure("arima", "budget")
    t.record_selection("ets")
    t.record_series_length(120)
    t.record_pool(workers=2, busy=1, queued=3)
    t.record_recycle("budget")
    return t


def test_every_metric_is_exposed_with_its_type() -> None:
    found = families(recorded())
    expected = {
        "windvane_requests": "counter",
        "windvane_request_duration_seconds": "histogram",
        "windvane_fit_duration_seconds": "histogram",
        "windvane_fit_failures": "counter",
        "windvane_cache_lookups": "counter",
        "windvane_selected_family": "counter",
        "windvane_series_length": "histogram",
        "windvane_pool_queue_depth": "gauge",
        "windvane_pool_busy_workers": "gauge",
        "windvane_pool_workers": "gauge",
        "windvane_pool_recycled_workers": "counter",
        "windvane_build_info": "gauge",
    }
    assert {name: found[name].type for name in expected} == expected


def test_recorded_values_and_labels() -> None:
    t = recorded()
    labels = {"route": "/v1/forecasts", "method": "POST"}
    assert sample(t, "windvane_requests_total", **labels, status="200") == 1
    assert sample(t, "windvane_requests_total", **labels, status="503") == 1
    assert sample(t, "windvane_request_duration_seconds_count", **labels) == 2
    assert sample(t, "windvane_request_duration_seconds_bucket", **labels, le="0.025") == 1
    assert sample(t, "windvane_cache_lookups_total", level="response", result="hit") == 1
    # An unexpected result is folded into a bounded value.
    assert sample(t, "windvane_cache_lookups_total", level="fitted", result="error") == 1
    assert sample(t, "windvane_cache_lookups_total", level="response", result="miss") == 0
    assert sample(t, "windvane_fit_duration_seconds_sum", family="ets") == pytest.approx(0.3)
    assert sample(t, "windvane_fit_failures_total", family="arima", reason="budget") == 1
    assert sample(t, "windvane_selected_family_total", family="ets") == 1
    assert sample(t, "windvane_series_length_bucket", le="250.0") == 1
    assert sample(t, "windvane_series_length_bucket", le="100.0") == 0
    assert sample(t, "windvane_pool_queue_depth") == 3
    assert sample(t, "windvane_pool_busy_workers") == 1
    assert sample(t, "windvane_pool_recycled_workers_total", reason="budget") == 1
    assert sample(t, "windvane_build_info", **runtime_versions()) == 1


def test_buckets_span_milliseconds_to_tens_of_seconds() -> None:
    t = recorded()
    bounds = [
        float(s.labels["le"])
        for s in families(t)["windvane_fit_duration_seconds"].samples
        if s.name.endswith("_bucket") and s.labels["le"] != "+Inf"
    ]
    assert min(bounds) <= 0.001 and max(bounds) >= 30


def test_each_app_has_its_own_registry() -> None:
    a, b = Telemetry(), Telemetry()
    a.record_series_length(10)
    assert b.registry.get_sample_value("windvane_series_length_count") == 0


@pytest.mark.skipif(
    shutil.which("promtool") is None,
    reason="promtool is not installed (Debian package 'prometheus'; .ci/run installs it)",
)
def test_promtool_accepts_the_exposition() -> None:
    done = subprocess.run(
        ["promtool", "check", "metrics"],
        input=recorded().exposition(),
        capture_output=True,
        timeout=30,
        check=False,
    )
    assert done.returncode == 0, done.stdout.decode() + done.stderr.decode()


def test_the_metrics_directory_is_emptied_of_metric_files_only(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    monkeypatch.setenv(MULTIPROCESS_ENV, "")  # restored after the test
    directory = tmp_path / "metrics"
    directory.mkdir()
    for name in ("counter_12.db", "gauge_livesum_12.db", "histogram_7.db"):
        (directory / name).write_bytes(b"old")
    prepare_multiprocess(directory)
    assert list(directory.iterdir()) == []
    assert os.environ[MULTIPROCESS_ENV] == str(directory)


@pytest.mark.parametrize("intruder", ["notes.txt", "counter_12.db.bak", "subdirectory"])
def test_a_metrics_directory_holding_other_files_is_refused_and_left_alone(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch, intruder: str
) -> None:
    monkeypatch.setenv(MULTIPROCESS_ENV, "")
    directory = tmp_path / "metrics"
    directory.mkdir()
    (directory / "counter_12.db").write_bytes(b"old")
    if intruder == "subdirectory":
        (directory / intruder).mkdir()
    else:
        (directory / intruder).write_text("keep me")
    with pytest.raises(MetricsDirectoryError, match="refusing to empty it"):
        prepare_multiprocess(directory)
    assert sorted(p.name for p in directory.iterdir()) == sorted(["counter_12.db", intruder])
    assert os.environ[MULTIPROCESS_ENV] == ""
