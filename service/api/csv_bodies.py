"""A ``text/csv`` body of ``timestamp,value`` rows and its query options, read into the JSON
request it stands for; every error names the line and column, or the query option."""

from __future__ import annotations

import csv
import io
import json
import math
from typing import Any
from urllib.parse import parse_qs

from service.runtime import charts

FORECASTS = "/v1/forecasts"
DIAGNOSTICS = "/v1/diagnostics"
BACKTESTS = "/v1/backtests"

# Query options of a CSV body, by route: name -> how to read it.
_SERIES_OPTIONS = ("frequency", "seasonal_period", "name", "missing")
_CSV_OPTIONS = ("timestamp_column", "value_column", "header")
_CHART_OPTIONS = ("width", "height")
_ROUTE_OPTIONS: dict[str, dict[str, str]] = {
    FORECASTS: {
        "horizon": "int",
        "coverage": "floats",
        "model": "model",
        "metric": "text",
        "transform": "text",
        "include": "texts",
    },
    DIAGNOSTICS: {"max_lag": "int", "include": "texts"},
    BACKTESTS: {
        "horizon": "int",
        "origins": "int",
        "step": "int",
        "coverage": "floats",
        "metric": "text",
        "estimation": "text",
        "models": "models",
    },
}


class CsvProblem(ValueError):
    """A CSV body or its query options that cannot stand for a request, naming the place."""

    def __init__(self, message: str, field: str) -> None:
        super().__init__(message)
        self.field = field


def _number(text: str, name: str, kind: type[int] | type[float]) -> int | float:
    try:
        value = kind(text)
    except ValueError:
        raise CsvProblem(
            f"{text[:40]!r} is not a {kind.__name__} number", f"query.{name}"
        ) from None
    if isinstance(value, float) and not math.isfinite(value):
        raise CsvProblem("must be a finite number", f"query.{name}")
    return value


def _period(text: str) -> int | float | list[int | float]:
    parts = [p.strip() for p in text.split(",") if p.strip()]
    numbers: list[int | float] = []
    for part in parts:
        value = _number(part, "seasonal_period", float)
        numbers.append(int(value) if float(value).is_integer() else value)
    if len(numbers) == 1:
        return numbers[0]
    return numbers


def _specification(text: str, name: str) -> Any:
    text = text.strip()
    if text.startswith("{"):
        try:
            return json.loads(text)
        except ValueError:
            raise CsvProblem("is not a JSON specification", f"query.{name}") from None
    return text if text == "auto" else {"family": text}


def _option(kind: str, text: str, name: str) -> Any:
    if kind == "int":
        return _number(text, name, int)
    if kind == "floats":
        return [_number(t.strip(), name, float) for t in text.split(",") if t.strip()]
    if kind == "texts":
        return [t.strip() for t in text.split(",") if t.strip()]
    if kind == "model":
        return _specification(text, name)
    if kind == "models":
        if text.strip() == "auto":
            return "auto"
        return [_specification(t, name) for t in text.split(",") if t.strip()]
    return text


def _rows(body: bytes) -> list[tuple[int, list[str]]]:
    try:
        text = body.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise CsvProblem(f"the CSV body is not UTF-8 (byte {exc.start})", "body") from None
    # newline="": a lone carriage return ends a row instead of being an error inside a cell.
    rows = csv.reader(io.StringIO(text, newline=""))
    try:
        return [
            (line, row) for line, row in enumerate(rows, start=1) if any(c.strip() for c in row)
        ]
    except csv.Error as exc:  # a cell past the module's size limit, a stray NUL, ...
        raise CsvProblem(
            f"the CSV body cannot be read: {exc}", f"csv.line[{rows.line_num}]"
        ) from None


def _is_number(text: str) -> bool:
    try:
        float(text)
    except ValueError:
        return text.strip() == ""
    return True


def _columns(
    rows: list[tuple[int, list[str]]], options: dict[str, str]
) -> tuple[int, int, list[tuple[int, list[str]]]]:
    """The timestamp and value columns, and the data rows (a header row taken off)."""
    stamp_name = options.get("timestamp_column", "timestamp")
    value_name = options.get("value_column", "value")
    header = options.get("header", "auto")
    if header not in ("auto", "present", "absent"):
        raise CsvProblem("must be auto, present or absent", "query.header")
    first = rows[0][1]
    has_header = header == "present" or (
        header == "auto"
        and (stamp_name in first or value_name in first or not _is_number(first[-1]))
    )
    if not has_header:
        return 0, 1, rows
    names = [cell.strip() for cell in first]
    for name, option in ((stamp_name, "timestamp_column"), (value_name, "value_column")):
        if name not in names:
            raise CsvProblem(
                f"no column {name[:40]!r} in the header ({', '.join(names)[:200]})",
                f"query.{option}",
            )
    return names.index(stamp_name), names.index(value_name), rows[1:]


def csv_request(path: str, body: bytes, query: bytes) -> dict[str, Any]:
    """The JSON request a CSV body and its query options stand for."""
    given = parse_qs(query.decode("latin-1"), keep_blank_values=True)
    allowed = _ROUTE_OPTIONS[path]
    options: dict[str, str] = {}
    for name, given_values in given.items():
        known = name in allowed or name in _SERIES_OPTIONS + _CSV_OPTIONS + _CHART_OPTIONS
        if not known:
            choices = ", ".join([*allowed, *_SERIES_OPTIONS, *_CSV_OPTIONS])
            raise CsvProblem(f"unknown option; allowed: {choices}", f"query.{name[:40]}")
        options[name] = given_values[-1]
    rows = _rows(body)
    if not rows:
        raise CsvProblem("the CSV body has no rows", "body")
    stamp_at, value_at, data = _columns(rows, options)
    if not data:
        raise CsvProblem("the CSV body has a header but no data rows", "body")
    stamps: list[str] = []
    values: list[float | None] = []
    for line, row in data:
        if len(row) <= max(stamp_at, value_at):
            raise CsvProblem(
                f"expected at least {max(stamp_at, value_at) + 1} columns", f"csv.line[{line}]"
            )
        stamps.append(row[stamp_at].strip())
        cell = row[value_at].strip()
        if cell == "" or cell.lower() in ("null", "na", "nan"):
            values.append(None)
            continue
        try:
            number = float(cell)
        except ValueError:
            raise CsvProblem(f"{cell[:40]!r} is not a number", f"csv.line[{line}].value") from None
        if not math.isfinite(number):
            raise CsvProblem("must be a finite number", f"csv.line[{line}].value")
        values.append(number)
    series: dict[str, Any] = {"timestamps": stamps, "values": values}
    for name in _SERIES_OPTIONS:
        if name in options:
            series[name] = _period(options[name]) if name == "seasonal_period" else options[name]
    request: dict[str, Any] = {"series": series}
    for name, kind in allowed.items():
        if name in options:
            request[name] = _option(kind, options[name], name)
    return request


def chart_size(query: bytes) -> tuple[int, int]:
    """``width`` and ``height`` from the query string, in pixels within the chart limits."""
    given = parse_qs(query.decode("latin-1"))
    size = []
    for name, default in (("width", charts.DEFAULT_WIDTH), ("height", charts.DEFAULT_HEIGHT)):
        text = given.get(name, [str(default)])[-1]
        value = int(_number(text, name, int))
        if not charts.MIN_PIXELS <= value <= charts.MAX_PIXELS:
            raise CsvProblem(
                f"must be between {charts.MIN_PIXELS} and {charts.MAX_PIXELS} pixels",
                f"query.{name}",
            )
        size.append(value)
    return size[0], size[1]
