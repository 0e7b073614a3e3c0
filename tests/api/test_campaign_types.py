"""More of the bad-input campaign: a wrong JSON type in every field, odd strings, batch items.

Each row must get what tests/api/test_campaign.py's ``check`` calls clean: a 4xx problem
naming a field (a 400 naming the body) or a 200 with finite numbers; never a 500, a hang or
a long echo of the input.
"""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

import pytest
from fastapi.testclient import TestClient
from test_campaign import LIMITS, Case, case, check, forecast, series

# Values of every JSON type, and some that overflow or nest.
WRONG = {
    "string": "seven",
    "empty-string": "",
    "true": True,
    "null": None,
    "negative": -1,
    "huge-integer": 10**40,
    "huge-float": 1.7e308,
    "tiny-float": 5e-324,
    "list": [1, "two", None],
    "object": {"a": {"b": [1]}},
    "nested-lists": [[[[[[[[[[1]]]]]]]]]],
}
FORECAST_FIELDS = (
    "horizon",
    "coverage",
    "model",
    "metric",
    "transform",
    "candidates",
    "regressors",
    "include",
    "lower_bound",
)
SERIES_FIELDS = (
    "values",
    "timestamps",
    "start",
    "frequency",
    "seasonal_period",
    "name",
    "missing",
    "aggregate",
)
ODD_STRINGS = {
    "nul": "a\x00b",
    "right-to-left-override": "\u202egnp.exe",
    "zero-width": "\u200b\u200c\u200d",
    "byte-order-mark": "\ufeffD",
    "combining-marks": "D" + "\u0301" * 200,
    "emoji": "\U0001f4c8" * 50,
    "fullwidth-digits": "\uff12\uff10\uff12\uff14-01-01",
    "private-use": "\ue000\U000f0000",
}

CASES: dict[str, Case] = {}
for kind, value in WRONG.items():
    for name in FORECAST_FIELDS:
        CASES[f"forecast-{name}-as-{kind}"] = case(forecast(**{name: value}))
    for name in SERIES_FIELDS:
        CASES[f"series-{name}-as-{kind}"] = case(forecast(series=series(**{name: value})))
    CASES[f"diagnostics-max-lag-as-{kind}"] = case(
        {"series": series(), "max_lag": value}, path="/v1/diagnostics"
    )
    CASES[f"backtest-origins-as-{kind}"] = case(
        {"series": series(), "horizon": 2, "origins": value}, path="/v1/backtests"
    )
    CASES[f"batch-item-as-{kind}"] = case(
        {"requests": [forecast(), value]}, path="/v1/forecast-batches", status=200
    )
    CASES[f"batch-requests-as-{kind}"] = case({"requests": value}, path="/v1/forecast-batches")
    CASES[f"model-member-as-{kind}"] = case(
        forecast({"family": "combination", "members": [{"family": "naive"}, value]})
    )
for kind, text in ODD_STRINGS.items():
    CASES[f"frequency-{kind}"] = case(forecast(series=series(frequency=text)))
    CASES[f"start-{kind}"] = case(forecast(series=series(start=text)))
    CASES[f"name-{kind}"] = case(forecast(series=series(name=text)))
    CASES[f"family-{kind}"] = case(forecast({"family": text}))
    CASES[f"timestamp-{kind}"] = case(
        forecast(series={"timestamps": ["2024-01-01", text, "2024-01-03"], "values": [1, 2, 3]})
    )
    CASES[f"batch-id-{kind}"] = case(
        {"requests": [{**forecast(), "id": text}]}, path="/v1/forecast-batches", status=200
    )


@pytest.fixture(scope="module")
def limited(shared_client: Callable[..., TestClient]) -> TestClient:
    return shared_client(**LIMITS)


def batch_items_clean(answer: Any) -> None:
    """Every item of a batch answer is a 200 or a 4xx problem."""
    for item in answer["results"]:
        assert item["status"] == 200 or 400 <= item["status"] < 500, item


@pytest.mark.parametrize("name", list(CASES))
def test_the_wrong_type_or_odd_string_gets_a_clean_answer(limited: TestClient, name: str) -> None:
    expected = CASES[name]
    response = limited.post(
        expected.path, content=expected.body, headers={"content-type": "application/json"}
    )
    check(response, expected)
    if expected.path == "/v1/forecast-batches" and response.status_code == 200:
        batch_items_clean(response.json())


def test_a_period_that_doubles_past_the_float_range_names_the_field(limited: TestClient) -> None:
    for value in (1.7e308, [2, 1e300]):
        body = forecast(series=series(seasonal_period=value))
        field = "series.seasonal_period" + ("[1]" if isinstance(value, list) else "")
        check(
            limited.post("/v1/forecasts", json=body),
            case(body, status=422, field=field),
        )


ROWS = "".join(f"2024-01-{d:02d},{10 + d % 7}\n" for d in range(1, 29))
CSV_BODIES = {
    "lone-carriage-returns": "timestamp,value\r" + ROWS.replace("\n", "\r"),
    "carriage-return-inside-a-cell": "\u00f9\r\u00d9p,\U000f4dbb\x11\u00f2",
    "windows-line-ends": "timestamp,value\r\n" + ROWS.replace("\n", "\r\n"),
    "a-cell-of-200-kilobytes": "timestamp,value\n" + "2024-01-01," + "9" * 200_000 + "\n",
    "a-nul-byte": "timestamp,value\n2024-01-01,1\x00\n" + ROWS,
    "an-unbalanced-quote": 'timestamp,value\n"2024-01-01,1\n' + ROWS,
    "a-number-past-float64": "timestamp,value\n" + ROWS + "2024-01-29,1e400\n",
    "semicolons": ROWS.replace(",", ";"),
    "only-a-header": "timestamp,value\n",
    "fullwidth-digits": ROWS.replace("1", "\uff11"),
}


@pytest.mark.parametrize("name", list(CSV_BODIES))
@pytest.mark.parametrize("path", ["/v1/forecasts?horizon=3&model=naive", "/v1/diagnostics"])
def test_a_hostile_csv_body_gets_a_clean_answer(limited: TestClient, name: str, path: str) -> None:
    response = limited.post(
        path, content=CSV_BODIES[name].encode(), headers={"content-type": "text/csv"}
    )
    check(response, Case(b"", path=path))
