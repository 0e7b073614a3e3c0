"""`windvane batch`: long tables in and out, a malformed series reported, resumed runs, and
the same answers from loky workers and from a Dask LocalCluster started here."""

from __future__ import annotations

from collections.abc import Iterator
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
import pytest

from service import batch, demo
from service.cli import main
from service.config import Settings
from service.runtime.fanout import WORKER_SETTINGS


def long_table(count: int, points: int = 48, seed: int = 11) -> pd.DataFrame:
    """Seeded monthly series with a season and a trend, in long format, and a series too
    short to forecast as the second."""
    rng = np.random.default_rng(seed)
    months = pd.date_range("2019-01-01", periods=points, freq="MS").strftime("%Y-%m-%d")
    frames = []
    for k in range(count):
        level = 100 + 10 * k + np.arange(points) * rng.uniform(0, 1)
        values = level + 8 * np.sin(2 * np.pi * np.arange(points) / 12) + rng.normal(0, 2, points)
        frames.append(pd.DataFrame({"store": f"s{k}", "month": months, "sales": values.round(3)}))
    broken = pd.DataFrame({"store": "broken", "month": months[:2], "sales": [1.0, 2.0]})
    return pd.concat([*frames[:1], broken, *frames[1:]], ignore_index=True)


def run(source: Path, output: Path, *extra: str) -> int:
    return main(
        [
            "batch", str(source), str(output), "--horizon", "4", "--id-column", "store",
            "--time-column", "month", "--value-column", "sales", "--quiet", *extra,
        ]
    )  # fmt: skip


@pytest.fixture
def table(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> Path:
    monkeypatch.setenv("WINDVANE_CACHE_DIR", str(tmp_path / "cache"))
    path = tmp_path / "sales.csv"
    long_table(3).to_csv(path, index=False)
    return path


def test_a_malformed_series_is_reported_and_the_rest_complete(
    table: Path, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    output = tmp_path / "forecasts.csv"
    assert run(table, output, "--model", "seasonal_naive", "--workers", "1") == 0
    captured = capsys.readouterr()
    assert "4 series: 3 answered, 1 failed, 0 not run" in captured.out
    assert "1 series failed" in captured.err
    forecasts = pd.read_csv(output, dtype={"timestamp": str})
    assert list(forecasts.columns) == batch.forecast_columns([0.8, 0.95])
    assert list(dict.fromkeys(forecasts["series_id"])) == ["s0", "s1", "s2"]
    assert (forecasts.groupby("series_id").size() == 4).all()
    assert forecasts["timestamp"].iloc[:4].tolist() == [
        "2023-01-01", "2023-02-01", "2023-03-01", "2023-04-01"
    ]  # fmt: skip
    assert (forecasts["lower_95"] <= forecasts["lower_80"]).all()
    summary = pd.read_csv(tmp_path / "forecasts.summary.csv").set_index("series_id")
    assert list(summary.index) == ["s0", "broken", "s1", "s2"]
    assert summary.loc["broken", "status"] == 422
    assert "requests[1].series" in summary.loc["broken", "problem"]
    assert summary.loc["s1", "model"] == "seasonal naive, period 12"
    assert summary.loc["s1", "verdict"] == "not_assessed"


def test_a_resumed_run_skips_the_finished_series(table: Path, tmp_path: Path) -> None:
    output = tmp_path / "forecasts.csv"
    source = pd.read_csv(table)
    first = source[source["store"].isin(["s0", "s1"])]
    first.to_csv(tmp_path / "first.csv", index=False)
    options = batch.Options(4, (0.8, 0.95), {"family": "naive"}, None,
                            batch.Columns("store", "month", "sales"))  # fmt: skip
    outputs = batch.Outputs(output, batch.summary_path(output))
    done = batch.run(tmp_path / "first.csv", outputs, options, Settings())
    assert (done.ran, done.skipped, done.failed) == (2, 0, 0)
    before = output.read_text()
    resumed = batch.run(table, outputs, options, Settings())
    assert (resumed.ran, resumed.skipped, resumed.failed) == (2, 2, 1)  # broken and s2
    assert output.read_text().startswith(before.splitlines(keepends=True)[0])
    assert before.splitlines()[1:5] == output.read_text().splitlines()[1:5]  # s0, untouched
    assert resumed.portfolio["series"] == 4 and resumed.portfolio["answered"] == 3


def test_an_interrupted_run_resumes_from_its_journal(table: Path, tmp_path: Path) -> None:
    output = tmp_path / "forecasts.parquet"
    outputs = batch.Outputs(output, batch.summary_path(output))
    options = batch.Options(4, (0.9,), "auto", "MS", batch.Columns("store", "month", "sales"))
    frame = batch.read_long(table, options.columns)
    first = next(batch.entries(frame, options))[1] | {"model": {"family": "naive"}}
    from service.api.batch_items import answer_entry

    outputs.append(answer_entry(first, 0, Settings()), options.coverage)
    with outputs.journals[0].open("a") as journal:
        journal.write("s1,2023-01-01,1.0,0.5")  # torn by the interruption
    assert outputs.finished() == {"s0"}
    report = batch.run(table, outputs, options, Settings(), workers=2)
    assert (report.ran, report.skipped) == (3, 1)
    assert not outputs.journals[0].exists()
    found = pd.read_parquet(output)
    assert list(found.columns) == ["series_id", "timestamp", "point", "lower_90", "upper_90"]
    assert list(dict.fromkeys(found["series_id"])) == ["s0", "s1", "s2"]
    assert pd.read_parquet(batch.summary_path(output))["verdict"].notna().sum() == 3


@pytest.fixture(scope="module")
def cluster() -> Iterator[str]:
    """A Dask LocalCluster of two single-threaded worker processes, for this module."""
    distributed = pytest.importorskip("distributed")
    import dask

    with (
        dask.config.set(WORKER_SETTINGS),
        distributed.LocalCluster(
            n_workers=2,
            threads_per_worker=1,
            processes=True,
            dashboard_address=":0",  # a free port: 8787 may be taken on a shared machine
            host="127.0.0.1",
        ) as local,
    ):
        yield str(local.scheduler_address)


def test_a_dask_cluster_gives_exactly_the_local_answers(
    cluster: str,
    tmp_path: Path,
    monkeypatch: pytest.MonkeyPatch,
    capsys: pytest.CaptureFixture[str],
) -> None:
    monkeypatch.setenv("WINDVANE_CACHE", "off")
    source = tmp_path / "sales.parquet"
    long_table(3, points=40, seed=5).to_parquet(source, index=False)
    local, remote = tmp_path / "local.csv", tmp_path / "remote.csv"
    assert run(source, local, "--workers", "2") == 0
    monkeypatch.setenv("WINDVANE_DASK_SCHEDULER", cluster)
    assert run(source, remote) == 0
    assert local.read_text().splitlines() == remote.read_text().splitlines()
    summaries = [p.with_name(p.stem + ".summary.csv") for p in (local, remote)]
    assert summaries[0].read_text() == summaries[1].read_text()
    # On the cluster too the malformed series is reported and the others are answered.
    status = pd.read_csv(summaries[1]).set_index("series_id")["status"].to_dict()
    assert status == {"s0": 200, "broken": 422, "s1": 200, "s2": 200}
    assert "4 series: 3 answered, 1 failed" in capsys.readouterr().out
    # A resumed run on the cluster sends only the series not yet answered (the broken one).
    before = remote.read_text()
    assert run(source, remote) == 0
    assert "this run: 1 series forecast, 3 already done" in capsys.readouterr().out
    assert remote.read_text() == before
    # The workers got WORKER_SETTINGS through their nannies: no profiles piling up.
    import distributed

    with distributed.Client(cluster) as client:
        held = client.run(lambda dask_worker: len(dask_worker.profile_history))
    assert held and set(held.values()) == {0}, held


def test_run_failures_are_one_line_with_a_status(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    assert run(tmp_path / "missing.csv", tmp_path / "out.csv") == 1
    wrong = tmp_path / "wrong.csv"
    wrong.write_text("a,b\n1,2\n")
    assert run(wrong, tmp_path / "out.csv") == 1
    assert run(wrong, tmp_path / "out.csv", "--coverage", "0.8", "1.2") == 2
    lines = capsys.readouterr().err.splitlines()
    assert len(lines) == 3, lines
    assert lines[0] == f"windvane batch: error: no such input file: {tmp_path / 'missing.csv'}"
    assert lines[1].startswith("windvane batch: error: cannot read")
    assert lines[2].startswith("windvane batch: error: --coverage:")


def test_workers_sharing_a_cache_directory_reuse_each_others_answers(
    tmp_path: Path, make_client: Any
) -> None:
    from service.api import batch_items

    settings = Settings(cache_dir=tmp_path / "shared", cache_secret="one secret")
    body = demo.request_body("fuel", horizon=3) | {"model": {"family": "theta"}, "id": "fuel"}
    first = batch_items.answer_entry(body, 0, settings)
    assert first["forecast"]["provenance"]["cache"] == "miss"
    batch_items._CACHES.clear()  # as a fresh worker process would start
    again = batch_items.answer_entry(body, 0, settings)
    assert again["forecast"]["provenance"]["cache"] == "hit"
    assert again["forecast"]["point"] == first["forecast"]["point"]
    with make_client(cache_dir=tmp_path / "shared", cache_secret="one secret") as client:
        served = client.post("/v1/forecasts", json={k: v for k, v in body.items() if k != "id"})
    assert served.json()["provenance"]["cache"] == "hit"
    assert served.json()["point"] == first["forecast"]["point"]


def test_a_batch_process_moves_its_libraries_out_of_the_collector_once(
    monkeypatch: pytest.MonkeyPatch,
) -> None:
    import gc

    from service.api import batch_items

    frozen: list[bool] = []
    monkeypatch.setattr(batch_items, "_SETTLED", [])  # as a fresh worker process would start
    monkeypatch.setattr(gc, "freeze", lambda: frozen.append(True))
    body = demo.request_body("fuel", horizon=3) | {"model": {"family": "naive"}, "id": "fuel"}
    broken = {"id": "broken", "series": {"values": []}, "horizon": 3}
    assert batch_items.answer_entry(broken, 0, Settings(cache="off"))["status"] == 422
    assert frozen == [True]  # after the first item, even a failed one
    assert batch_items.answer_entry(body, 1, Settings(cache="off"))["status"] == 200
    assert frozen == [True]


def test_the_benchmarks_memory_rule_tells_flat_from_growing() -> None:
    from tests.benchmarks.batch import memory_verdict

    times = [float(t) for t in range(101)]
    flat = {1: [(t, 250_000_000 + int(t) % 3 * 1_000_000) for t in times]}
    growing = {1: [(t, 250_000_000 + int(t) * 1_000_000) for t in times]}
    assert memory_verdict(flat, 0.0, 100.0).endswith("flat (rule: last/first quarter <= 1.10)")
    assert "GROWING" in memory_verdict(growing, 0.0, 100.0)
    assert memory_verdict({1: [(0.0, 1), (100.0, 1)]}, 0.0, 100.0).startswith("too few")


@pytest.mark.slow
def test_the_batch_benchmark_runs_two_local_workers_end_to_end() -> None:
    import subprocess
    import sys

    root = Path(__file__).resolve().parents[1]
    command = [sys.executable, "-m", "tests.benchmarks.batch", "--series", "4",
               "--only", "local2", "--sample-seconds", "0.2"]  # fmt: skip
    done = subprocess.run(command, cwd=root, capture_output=True, text=True, timeout=600)
    assert done.returncode == 0, done.stderr[-2000:]
    assert "local 2 loky workers: start-up" in done.stdout
    assert "(2 worker(s)); 4 series in" in done.stdout and "0 failed" in done.stdout
    assert done.stdout.count(" outside it; in a job ") == 2  # one line per worker
    assert "other processes" in done.stdout and "cores seen" in done.stdout
    assert "projected for --series 2000 on an idle machine" in done.stdout


def test_no_more_worker_processes_start_than_there_are_series_to_run(
    table: Path, tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    asked: list[int] = []

    def recorded(*args: Any, workers: int = 1, **kwargs: Any) -> Any:
        asked.append(workers)
        return fan_out(*args, workers=1, **kwargs)  # in this process: the test is what is asked

    from service.runtime.fanout import fan_out

    monkeypatch.setattr(batch, "fan_out", recorded)
    options = batch.Options(4, (0.8,), {"family": "naive"}, None,
                            batch.Columns("store", "month", "sales"))  # fmt: skip
    outputs = batch.Outputs(tmp_path / "out.csv", tmp_path / "out.summary.csv")
    assert batch.run(table, outputs, options, Settings(), workers=16).ran == 4
    assert batch.run(table, outputs, options, Settings(), workers=16).ran == 1  # broken, again
    assert asked == [4, 1]
