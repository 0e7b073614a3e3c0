"""The request log: one JSON line per request with the agreed fields and no values."""

from __future__ import annotations

import io
import json

from service.runtime.logs import RequestRecord, log_request, request_logger


def test_one_json_line_with_the_request_fields() -> None:
    stream = io.StringIO()
    logger = request_logger(stream)
    record = RequestRecord(
        request_id="abc123",
        route="/v1/forecasts",
        method="POST",
        status=200,
        duration_seconds=0.0123456789,
        cache="hit",
        model="ETS(A,Ad,N)",
        series_length=120,
    )
    log_request(logger, record)
    lines = stream.getvalue().splitlines()
    assert len(lines) == 1
    line = json.loads(lines[0])
    assert line["level"] == "info" and line["message"] == "request"
    assert {k: line[k] for k in ("request_id", "route", "method", "status", "cache")} == {
        "request_id": "abc123",
        "route": "/v1/forecasts",
        "method": "POST",
        "status": 200,
        "cache": "hit",
    }
    assert line["model"] == "ETS(A,Ad,N)" and line["series_length"] == 120
    assert line["duration_seconds"] == 0.012346


def test_server_errors_are_logged_as_errors_and_absent_fields_left_out() -> None:
    stream = io.StringIO()
    log_request(request_logger(stream), RequestRecord("r", "/healthz", "GET", 503, 0.5))
    line = json.loads(stream.getvalue())
    assert line["level"] == "error"
    assert "cache" not in line and "model" not in line


def test_a_second_setup_does_not_double_the_lines() -> None:
    first, second = io.StringIO(), io.StringIO()
    request_logger(first)
    logger = request_logger(second)
    log_request(logger, RequestRecord("r", "/healthz", "GET", 200, 0.001))
    assert first.getvalue() == ""
    assert len(second.getvalue().splitlines()) == 1


def test_the_record_has_no_place_for_series_values() -> None:
    fields = set(RequestRecord.__dataclass_fields__)
    assert not fields & {"values", "timestamps", "series", "name", "body"}
