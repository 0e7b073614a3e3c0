"""CSV bodies in; CSV tables, SVG and PNG charts out; 415 and 406 problems."""

from __future__ import annotations

import csv
import io
import struct
import xml.etree.ElementTree as ElementTree
from typing import Any

import numpy as np
import pandas as pd
import pytest
from fastapi.testclient import TestClient

from service.api.media import negotiate

FORECASTS = "/v1/forecasts"


def monthly(n: int = 48, seed: int = 3) -> tuple[list[str], list[float]]:
    """A seeded monthly series with a yearly cycle."""
    rng = np.random.default_rng(seed)
    stamps = pd.date_range("2021-01-01", periods=n, freq="MS").strftime("%Y-%m-%d").tolist()
    values = 200 + 20 * np.sin(np.arange(n) * 2 * np.pi / 12) + rng.normal(0, 3, n)
    return stamps, [round(float(v), 3) for v in values]


def csv_body(stamps: list[str], values: list[float], header: str = "timestamp,value") -> str:
    rows = [f"{t},{v}" for t, v in zip(stamps, values, strict=True)]
    return "\n".join(([header] if header else []) + rows) + "\n"


def json_body(stamps: list[str], values: list[float], **extra: Any) -> dict[str, Any]:
    return {"series": {"timestamps": stamps, "values": values}, **extra}


def table(text: str) -> list[dict[str, str]]:
    return list(csv.DictReader(io.StringIO(text)))


def test_negotiation_follows_quality_and_specificity() -> None:
    offers = ("application/json", "text/csv", "image/svg+xml", "image/png")
    assert negotiate("", offers) == "application/json"
    assert negotiate("*/*", offers) == "application/json"
    assert negotiate("text/csv", offers) == "text/csv"
    assert negotiate("image/*", offers) == "image/svg+xml"
    assert negotiate("image/png;q=0.9, text/csv;q=0.5", offers) == "image/png"
    assert negotiate("text/csv;q=0.2, */*;q=0.1", offers) == "text/csv"
    assert negotiate("application/problem+json", offers) == "application/json"
    assert negotiate("application/xml", offers) is None
    assert negotiate("text/csv;q=0", offers) is None


def test_a_csv_body_gives_the_same_forecast_as_json(client: TestClient) -> None:
    stamps, values = monthly()
    from_json = client.post(
        FORECASTS, json=json_body(stamps, values, horizon=6, model={"family": "seasonal_naive"})
    )
    from_csv = client.post(
        f"{FORECASTS}?horizon=6&model=seasonal_naive",
        content=csv_body(stamps, values),
        headers={"content-type": "text/csv"},
    )
    assert from_json.status_code == from_csv.status_code == 200
    assert from_csv.json()["point"] == from_json.json()["point"]
    assert from_csv.json()["intervals"] == from_json.json()["intervals"]


def test_a_csv_body_without_header_and_with_other_column_names(client: TestClient) -> None:
    stamps, values = monthly()
    plain = client.post(
        f"{FORECASTS}?horizon=3&model=naive",
        content=csv_body(stamps, values, header=""),
        headers={"content-type": "text/csv"},
    )
    named = client.post(
        f"{FORECASTS}?horizon=3&model=naive&timestamp_column=month&value_column=orders",
        content=csv_body(stamps, values, header="month,orders"),
        headers={"content-type": "text/csv; charset=utf-8"},
    )
    assert plain.status_code == named.status_code == 200
    assert plain.json()["point"] == named.json()["point"] == [values[-1]] * 3


def test_the_csv_table_carries_the_json_numbers(client: TestClient) -> None:
    stamps, values = monthly()
    body = json_body(stamps, values, horizon=5, coverage=[0.8, 0.95], model={"family": "drift"})
    answer = client.post(FORECASTS, json=body).json()
    response = client.post(FORECASTS, json=body, headers={"accept": "text/csv"})
    assert response.status_code == 200
    assert response.headers["content-type"].startswith("text/csv")
    assert response.headers["content-disposition"].startswith("attachment; filename=")
    assert response.headers["windvane-model"] == answer["model"]["label"]
    assert "windvane-warnings" in response.headers
    rows = table(response.text)
    assert list(rows[0]) == ["timestamp", "point", "lower_80", "upper_80", "lower_95", "upper_95"]
    assert [r["timestamp"] for r in rows] == answer["timestamps"]
    assert [float(r["point"]) for r in rows] == answer["point"]
    for interval in answer["intervals"]:
        level = f"{interval['coverage'] * 100:g}"
        assert [float(r[f"lower_{level}"]) for r in rows] == interval["lower"]
        assert [float(r[f"upper_{level}"]) for r in rows] == interval["upper"]


def test_backtest_and_diagnostics_tables(client: TestClient) -> None:
    stamps, values = monthly()
    backtest = client.post(
        "/v1/backtests?horizon=3&models=naive,seasonal_naive",
        content=csv_body(stamps, values),
        headers={"content-type": "text/csv", "accept": "text/csv"},
    )
    assert backtest.status_code == 200
    rows = table(backtest.text)
    assert {r["step"] for r in rows} == {"all", "1", "2", "3"}
    assert len({r["model"] for r in rows}) == 2
    assert "observed_coverage_80" in rows[0] and "msis_95" in rows[0]
    again = client.post(
        "/v1/backtests?horizon=3&models=naive,drift&estimation=every_origin",
        content=csv_body(stamps, values),
        headers={"content-type": "text/csv"},
    )
    assert again.status_code == 200
    assert again.json()["estimation"] == "every_origin"
    diagnostics_body = json_body(stamps, values, max_lag=12)
    answer = client.post("/v1/diagnostics", json=diagnostics_body).json()
    diagnostics = client.post(
        "/v1/diagnostics", json=diagnostics_body, headers={"accept": "text/csv"}
    )
    rows = table(diagnostics.text)
    correlogram = answer["autocorrelation"]["series"]
    assert [int(r["lag"]) for r in rows] == correlogram["lags"]
    assert [float(r["acf"]) for r in rows] == pytest.approx(correlogram["acf"], abs=0)


def png_size(data: bytes) -> tuple[int, int]:
    assert data[:8] == b"\x89PNG\r\n\x1a\n"
    width, height = struct.unpack(">II", data[16:24])
    return width, height


def test_forecast_charts_render_at_the_asked_size(client: TestClient) -> None:
    stamps, values = monthly()
    body = json_body(stamps, values, horizon=6, model={"family": "seasonal_naive"})
    body["series"]["name"] = "north depot orders"
    png = client.post(
        f"{FORECASTS}?width=640&height=320", json=body, headers={"accept": "image/png"}
    )
    assert png.status_code == 200 and png.headers["content-type"] == "image/png"
    assert png_size(png.content) == (640, 320)
    svg = client.post(FORECASTS, json=body, headers={"accept": "image/svg+xml"})
    assert svg.status_code == 200
    root = ElementTree.fromstring(svg.content)
    ns = "{http://www.w3.org/2000/svg}"
    title = root.find(f"{ns}title")
    label = client.post(FORECASTS, json=body).json()["model"]["label"]
    assert title is not None and title.text == f"north depot orders; model: {label}"
    assert root.find(f"{ns}desc") is not None
    again = client.post(FORECASTS, json=body, headers={"accept": "image/svg+xml"})
    assert again.content == svg.content


def test_diagnostics_chart_renders(client: TestClient) -> None:
    stamps, values = monthly()
    response = client.post(
        "/v1/diagnostics", json=json_body(stamps, values), headers={"accept": "image/png"}
    )
    assert response.status_code == 200
    assert png_size(response.content) >= (900, 450)


@pytest.mark.parametrize(
    ("query", "field"),
    [("width=50", "query.width"), ("height=99999", "query.height"), ("width=abc", "query.width")],
)
def test_a_chart_size_out_of_bounds_is_a_422(client: TestClient, query: str, field: str) -> None:
    stamps, values = monthly()
    response = client.post(
        f"{FORECASTS}?{query}",
        json=json_body(stamps, values, horizon=3, model={"family": "naive"}),
        headers={"accept": "image/png"},
    )
    assert response.status_code == 422
    assert response.json()["errors"][0]["field"] == field


@pytest.mark.parametrize(
    ("body", "query", "field"),
    [
        ("timestamp,value\n2024-01-01,12\n2024-02-01,abc\n", "horizon=2", "csv.line[3].value"),
        ("timestamp,value\n2024-01-01,12\n2024-02-01\n", "horizon=2", "csv.line[3]"),
        ("timestamp,value\n2024-01-01,inf\n", "horizon=2", "csv.line[2].value"),
        ("timestamp,value\n", "horizon=2", "body"),
        ("day,amount\n2024-01-01,1\n", "horizon=2", "query.timestamp_column"),
        ("timestamp,value\n2024-01-01,1\n", "horizon=2&colour=red", "query.colour"),
        ("timestamp,value\n2024-01-01,1\n", "horizon=two", "query.horizon"),
    ],
)
def test_csv_problems_name_the_line_and_column(
    client: TestClient, body: str, query: str, field: str
) -> None:
    response = client.post(
        f"{FORECASTS}?{query}", content=body, headers={"content-type": "text/csv"}
    )
    assert response.status_code == 422
    assert response.headers["content-type"] == "application/problem+json"
    assert response.json()["errors"][0]["field"] == field


def test_series_problems_of_a_csv_body_are_the_usual_422(client: TestClient) -> None:
    response = client.post(
        f"{FORECASTS}?horizon=2",
        content="timestamp,value\n2024-01-01,1\n2024-01-01,2\n2024-01-03,3\n",
        headers={"content-type": "text/csv"},
    )
    assert response.status_code == 422
    assert response.json()["errors"][0]["field"].startswith("series.")


@pytest.mark.parametrize("content_type", ["text/plain", "application/xml", "multipart/form-data"])
def test_an_unsupported_body_type_is_a_415(client: TestClient, content_type: str) -> None:
    response = client.post(FORECASTS, content=b"x", headers={"content-type": content_type})
    assert response.status_code == 415
    problem = response.json()
    assert problem["code"] == "unsupported_media_type"
    assert problem["errors"][0]["field"] == "headers.content-type"
    # The detail says what to send instead: JSON, or CSV where the endpoint takes it.
    assert problem["detail"].endswith("send application/json or text/csv")


def test_batches_take_no_csv_body(client: TestClient) -> None:
    response = client.post(
        "/v1/forecast-batches", content=b"a,b\n", headers={"content-type": "text/csv"}
    )
    assert response.status_code == 415
    assert response.json()["detail"].startswith("text/csv bodies are accepted by /v1/forecasts")


@pytest.mark.parametrize("path", [FORECASTS, "/v1/diagnostics", "/v1/backtests"])
def test_an_unsupported_accept_is_a_406(client: TestClient, path: str) -> None:
    accept = "image/png" if path == "/v1/backtests" else "application/xml"
    response = client.post(path, json={}, headers={"accept": accept})
    assert response.status_code == 406
    assert response.json()["code"] == "not_acceptable"
    assert response.json()["errors"][0]["field"] == "headers.accept"


def test_errors_keep_problem_json_whatever_was_asked(client: TestClient) -> None:
    response = client.post(FORECASTS, json={"horizon": 3}, headers={"accept": "text/csv"})
    assert response.status_code == 422
    assert response.headers["content-type"] == "application/problem+json"
