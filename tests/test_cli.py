"""The installed `windvane` console script: openapi, demo and an in-process forecast."""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path
from typing import Any

import pytest

from service import demo
from service.api.openapi import schema_text
from service.api.schemas.forecasts import ForecastRequest, ForecastResponse
from service.cli import main

SCRIPT = Path(sys.executable).parent / "windvane"


def run(
    *args: str, stdin: str | None = None, cwd: Path | None = None
) -> subprocess.CompletedProcess[str]:
    """Run the console script with a bounded wait; its files go under ``cwd``."""
    env = {**os.environ, "WINDVANE_API_KEYS": "", "WINDVANE_CACHE": "off"}
    return subprocess.run(
        [str(SCRIPT), *args],
        input=stdin,
        capture_output=True,
        text=True,
        timeout=120,
        cwd=cwd,
        env=env,
        check=False,
    )


def test_the_console_script_is_installed() -> None:
    assert SCRIPT.exists(), "run `pip install -e '.[test]'` to install the windvane script"


def test_openapi_to_stdout_is_the_schema() -> None:
    done = run("openapi", "-")
    assert done.returncode == 0, done.stderr
    schema = json.loads(done.stdout)
    assert schema["openapi"].startswith("3.")
    assert "/v1/forecasts" in schema["paths"]
    assert done.stdout == schema_text()


def test_demo_list_names_every_scenario_series() -> None:
    done = run("demo", "list")
    assert done.returncode == 0, done.stderr
    rows = [line.split("\t") for line in done.stdout.splitlines()]
    assert [r[0] for r in rows] == list(demo.SCENARIO)
    assert all(len(r) == 2 and r[1] for r in rows)


def test_forecast_answers_a_demo_body_from_a_file_and_from_stdin(tmp_path: Path) -> None:
    body = run("demo", "orders", "--horizon", "5")
    assert body.returncode == 0, body.stderr
    request: dict[str, Any] = json.loads(body.stdout)
    ForecastRequest.model_validate(request)
    request["model"] = {"family": "seasonal_naive"}
    path = tmp_path / "orders.json"
    path.write_text(json.dumps(request), encoding="utf-8")
    from_file = run("forecast", str(path), cwd=tmp_path)
    assert from_file.returncode == 0, from_file.stderr
    answer = json.loads(from_file.stdout)
    ForecastResponse.model_validate(answer)
    assert answer["model"]["label"] == "seasonal naive, period 52"
    assert answer["point"] == request["series"]["values"][-52:-47]
    from_stdin = run("forecast", "-", stdin=json.dumps(request), cwd=tmp_path)
    assert from_stdin.returncode == 0, from_stdin.stderr
    assert json.loads(from_stdin.stdout)["point"] == answer["point"]


def test_forecast_reports_a_bad_series_on_stderr(
    capsys: pytest.CaptureFixture[str], tmp_path: Path
) -> None:
    body = demo.request_body("fuel")
    body["series"]["values"][2] = "high"
    path = tmp_path / "bad.json"
    path.write_text(json.dumps(body), encoding="utf-8")
    assert main(["forecast", str(path)]) == 1
    captured = capsys.readouterr()
    assert captured.out == ""
    report = json.loads(captured.err)
    assert report["status"] == 422
    assert report["errors"][0]["field"] == "series.values[2]"


def test_forecast_reports_a_schema_error_naming_the_field(
    capsys: pytest.CaptureFixture[str], tmp_path: Path
) -> None:
    body = demo.request_body("fuel")
    body["horizon"] = "soon"
    path = tmp_path / "bad.json"
    path.write_text(json.dumps(body), encoding="utf-8")
    assert main(["forecast", str(path)]) == 1
    assert json.loads(capsys.readouterr().err)["errors"][0]["field"] == "horizon"


def test_an_unknown_demo_series_exits_2(capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["demo", "weather"]) == 2
    assert "windvane demo list" in capsys.readouterr().err


def test_demo_bodies_for_each_endpoint_kind(capsys: pytest.CaptureFixture[str]) -> None:
    for kind in ("forecast", "diagnostics", "backtest"):
        assert main(["demo", "energy", "--kind", kind]) == 0
        body = json.loads(capsys.readouterr().out)
        assert body["series"]["frequency"] == "P1M"
        assert ("horizon" in body) == (kind != "diagnostics")


def test_forecast_reports_malformed_json_as_400_on_the_body(
    capsys: pytest.CaptureFixture[str], tmp_path: Path
) -> None:
    path = tmp_path / "cut.json"
    path.write_text(json.dumps(demo.request_body("fuel"))[:40], encoding="utf-8")
    assert main(["forecast", str(path)]) == 1
    report = json.loads(capsys.readouterr().err)
    assert report["status"] == 400
    assert report["errors"][0]["field"] == "body"


def test_forecast_names_list_items_as_the_http_problems_do(
    capsys: pytest.CaptureFixture[str], tmp_path: Path
) -> None:
    body = demo.request_body("fuel")
    body["coverage"] = [0.8, "wide"]
    path = tmp_path / "bad.json"
    path.write_text(json.dumps(body), encoding="utf-8")
    assert main(["forecast", str(path)]) == 1
    assert json.loads(capsys.readouterr().err)["errors"][0]["field"] == "coverage[1]"


def one_line_error(capsys: pytest.CaptureFixture[str], out: str = "") -> str:
    """The command's stderr, checked to be exactly one line and no traceback."""
    captured = capsys.readouterr()
    assert captured.out == out
    err = captured.err
    assert len(err.splitlines()) == 1, err
    assert "Traceback" not in err
    return err.strip()


def test_a_missing_request_file_is_one_line(capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["forecast", "no-such-file.json"]) == 1
    assert one_line_error(capsys) == "windvane forecast: error: no such file: no-such-file.json"


@pytest.mark.parametrize("horizon", ["0", "-3", "1000000"])
def test_the_demo_horizon_is_checked_as_the_api_checks_it(
    horizon: str, capsys: pytest.CaptureFixture[str]
) -> None:
    assert main(["demo", "energy", "--horizon", horizon]) == 2
    assert one_line_error(capsys).startswith("windvane demo: error: --horizon: ")


def test_argument_errors_are_one_line(capsys: pytest.CaptureFixture[str]) -> None:
    with pytest.raises(SystemExit) as stopped:
        main(["demo", "energy", "--horizon", "soon"])
    assert stopped.value.code == 2
    assert "invalid int value" in one_line_error(capsys)


def test_an_unexpected_failure_is_one_line(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    assert main(["openapi", str(tmp_path / "missing" / "openapi.json")]) == 1
    assert one_line_error(capsys).startswith("windvane openapi: error: FileNotFoundError")


def test_an_unreachable_service_is_one_line(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    from live_server import free_port

    path = tmp_path / "fuel.json"
    path.write_text(json.dumps(demo.request_body("fuel")), encoding="utf-8")
    url = f"http://127.0.0.1:{free_port()}"
    assert main(["forecast", str(path), "--url", url]) == 1
    assert one_line_error(capsys).startswith(f"windvane forecast: error: cannot reach {url}")
    assert main(["diagnose", str(path), "--url", "ftp://example"]) == 2
    assert "--url must start with http://" in one_line_error(capsys)


@pytest.mark.parametrize(
    "command", [[], ["serve"], ["openapi"], ["demo"], ["forecast"], ["diagnose"], ["batch"]]
)
def test_every_help_shows_an_example(
    command: list[str], capsys: pytest.CaptureFixture[str]
) -> None:
    with pytest.raises(SystemExit) as stopped:
        main([*command, "--help"])
    assert stopped.value.code == 0
    out = capsys.readouterr().out
    assert "example:\n  windvane " in out, out
