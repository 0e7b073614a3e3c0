"""Malformed requests to POST /v1/forecasts: each is an RFC 9457 problem naming the field.

The table runs against an app with small limits (LIMITED: 40 points, horizon 24, 4000 body
bytes); bodies are cut from the demo scenario's weekly orders.
"""

from __future__ import annotations

import copy
import json
from collections.abc import Callable, Iterator
from dataclasses import dataclass, field
from typing import Any

import pandas as pd
import pytest
from fastapi.testclient import TestClient

from service import demo

PATH = "/v1/forecasts"
LIMITED = {"max_points": 40, "max_horizon": 24, "max_body_bytes": 4_000}
ORDERS = demo.orders()
VALUES = ORDERS.values[:20]
STAMPS = [t.date().isoformat() for t in pd.date_range(ORDERS.start, periods=20, freq="W-MON")]


def start_body() -> dict[str, Any]:
    """A valid request in the start + frequency form."""
    return {
        "series": {"start": ORDERS.start, "frequency": ORDERS.frequency, "values": list(VALUES)},
        "horizon": 4,
        "coverage": [0.8, 0.95],
        "model": {"family": "naive"},
    }


def stamps_body() -> dict[str, Any]:
    """A valid request in the timestamps form, frequency inferred."""
    return {
        "series": {"timestamps": list(STAMPS), "values": list(VALUES)},
        "horizon": 4,
        "model": {"family": "drift"},
    }


def edit(base: Callable[[], dict[str, Any]], change: Callable[[dict[str, Any]], Any]) -> str:
    """The JSON text of ``base()`` after ``change`` mutates it."""
    body = base()
    change(body)
    return json.dumps(body)


def put(path: str, value: Any) -> Callable[[dict[str, Any]], None]:
    """A change setting the dotted path (list indexes as numbers) to ``value``."""

    def change(body: dict[str, Any]) -> None:
        keys: list[Any] = [int(k) if k.isdigit() else k for k in path.split(".")]
        target: Any = body
        for key in keys[:-1]:
            target = target[key]
        target[keys[-1]] = value

    return change


def drop(path: str) -> Callable[[dict[str, Any]], None]:
    """A change removing the dotted path."""

    def change(body: dict[str, Any]) -> None:
        *head, last = path.split(".")
        target: Any = body
        for key in head:
            target = target[key]
        del target[last]

    return change


def raw_value(index: int, literal: str) -> str:
    """The start body with values[index] written as a raw JSON token (NaN, 1e400, ...)."""
    body = start_body()
    body["series"]["values"][index] = "__HOLE__"
    return json.dumps(body).replace('"__HOLE__"', literal)


def stamps_with(change: Callable[[list[str]], None], **series: Any) -> str:
    """The timestamps body after ``change`` edits the timestamps list."""
    body = stamps_body()
    change(body["series"]["timestamps"])
    body["series"].update(series)
    return json.dumps(body)


def swap(i: int, j: int) -> Callable[[list[str]], None]:
    def change(stamps: list[str]) -> None:
        stamps[i], stamps[j] = stamps[j], stamps[i]

    return change


def replace(i: int, text: str) -> Callable[[list[str]], None]:
    def change(stamps: list[str]) -> None:
        stamps[i] = text

    return change


def with_offsets(first: str, rest: str, naive_at: int | None = None) -> Callable[[list[str]], None]:
    """Give timestamps[0] the ``first`` offset and the others ``rest`` (or none at one index)."""

    def change(stamps: list[str]) -> None:
        for i, s in enumerate(stamps):
            stamps[i] = f"{s}T00:00:00{first if i == 0 else rest}"
        if naive_at is not None:
            stamps[naive_at] = stamps[naive_at][:10]

    return change


@dataclass(frozen=True)
class Row:
    """One malformed request and the problem it must produce."""

    body: str | None
    status: int
    code: str
    field: str | None
    method: str = "POST"
    path: str = PATH
    headers: dict[str, str] = field(default_factory=dict)
    chunked: bool = False


OVER_LIMIT = json.dumps({**start_body(), "padding": "x" * LIMITED["max_body_bytes"]})
NULL_AT_3 = edit(start_body, put("series.values.3", None))

ROWS = {
    "empty-values": Row(
        edit(start_body, put("series.values", [])), 422, "invalid_series", "series.values"
    ),
    "too-short": Row(
        edit(start_body, put("series.values", [1.0, 2.0])), 422, "invalid_series", "series.values"
    ),
    "too-long": Row(
        edit(start_body, put("series.values", ORDERS.values[:41])),
        422,
        "invalid_series",
        "series.values",
    ),
    "mismatched-lengths": Row(
        edit(stamps_body, put("series.values", VALUES[:19])),
        422,
        "invalid_series",
        "series.timestamps",
    ),
    "non-numeric-value": Row(
        edit(start_body, put("series.values.2", "12")), 422, "invalid_series", "series.values[2]"
    ),
    "boolean-value": Row(
        edit(start_body, put("series.values.2", True)), 422, "invalid_series", "series.values[2]"
    ),
    "nested-value": Row(
        edit(start_body, put("series.values.5", [1.0])), 422, "invalid_series", "series.values[5]"
    ),
    "nan-literal": Row(raw_value(2, "NaN"), 422, "invalid_series", "series.values[2]"),
    "infinity-literal": Row(raw_value(2, "Infinity"), 422, "invalid_series", "series.values[2]"),
    "minus-infinity-literal": Row(
        raw_value(7, "-Infinity"), 422, "invalid_series", "series.values[7]"
    ),
    "overflow-1e400": Row(raw_value(2, "1e400"), 422, "invalid_series", "series.values[2]"),
    "unparseable-timestamp": Row(
        stamps_with(replace(1, "2023-02-30")), 422, "invalid_series", "series.timestamps[1]"
    ),
    "word-timestamp": Row(
        stamps_with(replace(1, "yesterday")), 422, "invalid_series", "series.timestamps[1]"
    ),
    "timestamp-not-string": Row(
        edit(stamps_body, put("series.timestamps.1", 20230109)),
        422,
        "invalid_series",
        "series.timestamps[1]",
    ),
    "unsorted": Row(stamps_with(swap(4, 5)), 422, "invalid_series", "series.timestamps[5]"),
    "duplicate": Row(
        stamps_with(replace(6, STAMPS[5])), 422, "invalid_series", "series.timestamps[6]"
    ),
    "irregular-no-frequency": Row(
        stamps_with(replace(9, "2023-03-07")), 422, "invalid_series", "series.timestamps[9]"
    ),
    "off-declared-grid": Row(
        stamps_with(replace(9, "2023-03-07"), frequency="W-MON"),
        422,
        "invalid_series",
        "series.timestamps[9]",
    ),
    "mixed-utc-offsets": Row(
        stamps_with(with_offsets("+01:00", "+02:00")), 422, "invalid_series", "series.timestamps[1]"
    ),
    "aware-naive-mix": Row(
        stamps_with(with_offsets("+00:00", "+00:00", naive_at=3)),
        422,
        "invalid_series",
        "series.timestamps[3]",
    ),
    "invalid-frequency": Row(
        edit(start_body, put("series.frequency", "P1Q")), 422, "invalid_series", "series.frequency"
    ),
    "start-without-frequency": Row(
        edit(start_body, drop("series.frequency")), 422, "invalid_series", "series.frequency"
    ),
    "start-and-timestamps": Row(
        edit(stamps_body, put("series.start", STAMPS[0])), 422, "invalid_series", "series.start"
    ),
    "start-off-anchor": Row(
        edit(start_body, put("series.frequency", "W-TUE")), 422, "invalid_series", "series.start"
    ),
    "start-unparseable": Row(
        edit(start_body, put("series.start", "2023-01-32")), 422, "invalid_series", "series.start"
    ),
    "seasonal-period-zero": Row(
        edit(start_body, put("series.seasonal_period", 0)),
        422,
        "invalid_series",
        "series.seasonal_period",
    ),
    "seasonal-period-list-entry": Row(
        edit(start_body, put("series.seasonal_period", [7, 0.5])),
        422,
        "invalid_series",
        "series.seasonal_period[1]",
    ),
    "unknown-missing-policy": Row(
        edit(start_body, put("series.missing", "drop")), 422, "invalid_request", "series.missing"
    ),
    "unknown-series-field": Row(
        edit(start_body, put("series.unit", "kg")), 422, "invalid_request", "series.unit"
    ),
    "horizon-zero": Row(edit(start_body, put("horizon", 0)), 422, "invalid_request", "horizon"),
    "horizon-over-limit": Row(
        edit(start_body, put("horizon", LIMITED["max_horizon"] + 1)),
        422,
        "invalid_option",
        "horizon",
    ),
    "horizon-as-text": Row(
        edit(start_body, put("horizon", "4")), 422, "invalid_request", "horizon"
    ),
    "horizon-boolean": Row(
        edit(start_body, put("horizon", True)), 422, "invalid_request", "horizon"
    ),
    "horizon-missing": Row(edit(start_body, drop("horizon")), 422, "invalid_request", "horizon"),
    "series-missing": Row(edit(start_body, drop("series")), 422, "invalid_request", "series"),
    "coverage-one": Row(
        edit(start_body, put("coverage", [1.0])), 422, "invalid_option", "coverage[0]"
    ),
    "coverage-zero": Row(
        edit(start_body, put("coverage", [0.8, 0])), 422, "invalid_option", "coverage[1]"
    ),
    "coverage-duplicate": Row(
        edit(start_body, put("coverage", [0.9, 0.9])), 422, "invalid_option", "coverage"
    ),
    "coverage-nan": Row(
        json.dumps(start_body()).replace("[0.8, 0.95]", "[NaN]"),
        422,
        "invalid_option",
        "coverage[0]",
    ),
    "unknown-family": Row(
        edit(start_body, put("model", {"family": "oracle"})),
        422,
        "invalid_specification",
        "model.family",
    ),
    "unknown-parameter": Row(
        edit(start_body, put("model", {"family": "naive", "bogus": 1})),
        422,
        "invalid_specification",
        "model.bogus",
    ),
    "bad-parameter-value": Row(
        edit(start_body, put("model", {"family": "ets", "trend": "sideways"})),
        422,
        "invalid_specification",
        "model.trend",
    ),
    "unknown-candidate-family": Row(
        edit(start_body, put("candidates", [{"family": "naive"}, {"family": "oracle"}])),
        422,
        "invalid_specification",
        "candidates[1].family",
    ),
    "model-not-an-object": Row(
        edit(start_body, put("model", ["naive"])), 422, "invalid_request", "model"
    ),
    "unknown-top-level-field": Row(
        edit(start_body, put("bogus", 1)), 422, "invalid_request", "bogus"
    ),
    "body-not-an-object": Row(json.dumps([start_body()]), 422, "invalid_request", "body"),
    "body-null": Row("null", 422, "invalid_request", "body"),
    "malformed-json": Row('{"series": {"values": [1, 2,, 3]}}', 400, "malformed_json", "body"),
    "truncated-json": Row(json.dumps(start_body())[:-9], 400, "malformed_json", "body"),
    "body-over-limit-by-length": Row(OVER_LIMIT, 413, "body_too_large", "body"),
    "body-over-limit-chunked": Row(OVER_LIMIT, 413, "body_too_large", "body", chunked=True),
    "unknown-route": Row(None, 404, "not_found", None, method="GET", path="/v1/forecast"),
    "wrong-method": Row(None, 405, "method_not_allowed", None, method="GET"),
    "missing-error-with-null": Row(
        edit(
            start_body,
            lambda b: (put("series.values.3", None)(b), put("series.missing", "error")(b)),
        ),
        422,
        "invalid_series",
        "series.values[3]",
    ),
    "every-value-null": Row(
        edit(start_body, put("series.values", [None] * 20)), 422, "invalid_series", "series.values"
    ),
}


@pytest.fixture(scope="module")
def limited_client(shared_client: Callable[..., TestClient]) -> TestClient:
    """A client of an app with the LIMITED limits."""
    return shared_client(**LIMITED)


def send(client: TestClient, row: Row) -> Any:
    """Send one row's request the way its id says (chunked rows without Content-Length)."""
    headers = {"content-type": "application/json", "x-request-id": "table-row", **row.headers}
    if row.body is None:
        return client.request(row.method, row.path, headers=headers)
    data = row.body.encode()
    if row.chunked:

        def pieces() -> Iterator[bytes]:
            for i in range(0, len(data), 512):
                yield data[i : i + 512]

        return client.request(row.method, row.path, content=pieces(), headers=headers)
    return client.request(row.method, row.path, content=data, headers=headers)


def assert_problem(response: Any, status: int, code: str) -> dict[str, Any]:
    """The response is an RFC 9457 problem with our extensions and no traceback."""
    assert response.status_code == status, response.text
    assert response.headers["content-type"].startswith("application/problem+json")
    body: dict[str, Any] = response.json()
    for key in ("type", "title", "status", "detail", "instance", "errors"):
        assert key in body, key
    assert body["status"] == status
    assert body["code"] == code
    assert body["type"] == "/problems/" + code.replace("_", "-")
    assert isinstance(body["title"], str) and body["title"]
    assert isinstance(body["detail"], str) and body["detail"]
    assert isinstance(body["errors"], list)
    for error in body["errors"]:
        assert set(error) == {"field", "message"}
    assert "Traceback" not in response.text
    return body


def test_the_two_base_bodies_are_valid(limited_client: TestClient) -> None:
    for body in (start_body(), stamps_body()):
        response = limited_client.post(PATH, json=body)
        assert response.status_code == 200, response.text
        answer = response.json()
        assert len(answer["point"]) == body["horizon"] and answer["warnings"] == []
        assert answer["model"]["family"] == body["model"]["family"]


def test_the_table_has_at_least_thirty_rows() -> None:
    assert len(ROWS) >= 30


@pytest.mark.parametrize("row", list(ROWS.values()), ids=list(ROWS))
def test_malformed_request_is_a_problem_naming_the_field(
    limited_client: TestClient, row: Row
) -> None:
    response = send(limited_client, row)
    body = assert_problem(response, row.status, row.code)
    assert body["instance"] == row.path
    assert body["request_id"] == response.headers["x-request-id"] == "table-row"
    if row.field is None:
        assert body["errors"] == []
    else:
        assert body["errors"], body
        assert body["errors"][0]["field"] == row.field
    if row.status == 405:
        assert "POST" in response.headers["allow"]


def test_every_listed_error_names_a_field(limited_client: TestClient) -> None:
    body = start_body()
    body["series"]["values"][1] = "a"
    body["series"]["values"][4] = True
    body["series"]["values"][6] = {"value": 3}
    response = limited_client.post(PATH, json=body)
    problem = assert_problem(response, 422, "invalid_series")
    assert [e["field"] for e in problem["errors"]] == [
        "series.values[1]",
        "series.values[4]",
        "series.values[6]",
    ]


def test_a_schema_error_lists_every_offending_field(limited_client: TestClient) -> None:
    body = copy.deepcopy(start_body())
    body["horizon"] = "soon"
    body["series"]["name"] = 7
    body["extra"] = True
    problem = assert_problem(limited_client.post(PATH, json=body), 422, "invalid_request")
    assert {e["field"] for e in problem["errors"]} == {"horizon", "series.name", "extra"}


def test_a_null_is_a_missing_value_by_default(limited_client: TestClient) -> None:
    response = limited_client.post(
        PATH, content=NULL_AT_3, headers={"content-type": "application/json"}
    )
    assert response.status_code == 200, response.text
    assert [w["code"] for w in response.json()["warnings"]] == ["interpolated"]
    assert response.json()["warnings"][0]["message"].startswith("1 missing value(s)")
