"""The bad-input campaign: valid or nearly valid JSON that once crashed, hung or lied.

Every row is sent to every endpoint it fits; the answer must be a 4xx problem naming the
field (or the body and byte offset for a 400), or a 200 whose numbers are all finite. A 500,
a plain-text error or an echo of more than a short excerpt of the input fails the row.
"""

from __future__ import annotations

import json
import math
from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

import pytest
from fastapi.testclient import TestClient

LIMITS = {"max_points": 400, "max_horizon": 24, "fit_seconds": 20.0}
VALUES = [float(10 + (i % 7) + 0.1 * i) for i in range(40)]


def series(**fields: Any) -> dict[str, Any]:
    """A valid daily series, with ``fields`` replacing its parts."""
    base: dict[str, Any] = {"start": "2024-01-01", "frequency": "D", "values": list(VALUES)}
    base.update(fields)
    return {k: v for k, v in base.items() if v is not None}


def sparse(*stamps: str, frequency: str = "PT1M") -> dict[str, Any]:
    """A few timestamps far apart on a fine declared grid: its gaps would be expanded."""
    return {"timestamps": list(stamps), "values": [1.0] * len(stamps), "frequency": frequency}


def forecast(model: Any = None, **fields: Any) -> dict[str, Any]:
    """A forecast body with a naive model unless told otherwise."""
    body: dict[str, Any] = {"series": series(), "horizon": 3, "model": model or {"family": "naive"}}
    body.update(fields)
    return body


def nested(depth: int) -> dict[str, Any]:
    """A combination of combinations, ``depth`` levels deep."""
    spec: dict[str, Any] = {"family": "naive"}
    for _ in range(depth):
        spec = {"family": "combination", "members": [spec]}
    return spec


@dataclass(frozen=True)
class Case:
    """A request body, the endpoint, and what a correct answer is."""

    body: bytes
    path: str = "/v1/forecasts"
    status: int | None = None  # None: any 4xx or 200 with finite numbers
    field: str | None = None  # the first error's field, when a 4xx is expected
    message: str | None = None  # a fragment of the first error's message


def case(body: Any, **expect: Any) -> Case:
    raw = body if isinstance(body, bytes) else json.dumps(body).encode()
    return Case(raw, **expect)


LONG = "2024-01-01" + "0" * 300_000
# Frequencies that overflow or that the service does not support: a 422 naming the field.
REFUSED_FREQUENCIES = {
    "iso-duration-of-twenty-digits": "P99999999999999999999D",
    "alias-multiple-of-twenty-digits": "99999999999999999999D",
    "alias-multiple-of-seven-digits": "1000000D",
    "sub-second-step": "10ms",
    "an-old-millisecond-alias": "L",
}
CASES: dict[str, Case] = {
    # Numbers and intervals that overflow float64.
    "coverage-a-hair-below-one": case(
        forecast(coverage=[0.9999999999999999]), status=422, field="coverage"
    ),
    "values-alternating-tiny-and-huge": case(
        forecast({"family": "mean"}, series=series(values=[1e-300, 1e300] * 20)),
        status=422,
        field="series.values[1]",
    ),
    "box-cox-exponent-minus-fifty": case(
        forecast(transform={"kind": "boxcox", "power": -50}), status=422, field="transform.power"
    ),
    "box-cox-exponent-plus-fifty": case(
        forecast(transform={"kind": "boxcox", "power": 50}), status=422, field="transform.power"
    ),
    # Structure: nesting, odd strings, unknown keys.
    "combinations-nested-300-deep": case(forecast(nested(300)), status=422, field="model"),
    "combinations-nested-300-deep-as-candidate": case(
        forecast("auto", candidates=[nested(300)]), status=422, field="candidates[0]"
    ),
    "backtest-of-a-300-deep-combination": case(
        {"series": series(), "horizon": 2, "models": [nested(300)]},
        path="/v1/backtests",
        status=422,
        field="models[0]",
    ),
    "lone-surrogate-as-unknown-model-key": case(
        b'{"series": {"start": "2024-01-01", "frequency": "D", "values": [1, 2, 3, 4]},'
        b' "horizon": 1, "model": {"family": "naive", "\\ud800": 2}}',
        status=422,
    ),
    "lone-surrogate-as-unknown-top-key": case(
        b'{"series": {"start": "2024-01-01", "frequency": "D", "values": [1, 2, 3, 4]},'
        b' "horizon": 1, "\\udfff": 2}',
        status=422,
    ),
    "lone-surrogate-in-name": case(
        b'{"series": {"start": "2024-01-01", "frequency": "D", "values": [1, 2, 3, 4],'
        b' "name": "\\ud83d"}, "horizon": 1}',
        status=422,
    ),
    "long-unknown-key": case({**forecast(), "k" * 50_000: 1}, status=422),
    "json-nested-100000-deep": case(b"[" * 100_000 + b"]" * 100_000, status=400, field="body"),
    "json-cut-short": case(b'{"series": {"values": [1, 2,', status=400, field="body"),
    "json-with-a-multibyte-character-before-the-error": case(
        '{"series": {"name": "été", "values": [1, 2,, 3]}}'.encode(),
        status=400,
        field="body",
        message="at byte 45 (line 1, column 44)",  # 43 characters, two of them 2 bytes
    ),
    # Timestamps and strings over their schema bounds.
    "timestamp-of-300-kilobytes": case(
        forecast(series={"timestamps": [LONG, "2024-01-02", "2024-01-03"], "values": [1, 2, 3]}),
        status=422,
    ),
    "start-of-300-kilobytes": case(forecast(series=series(start=LONG)), status=422),
    "frequency-of-300-kilobytes": case(
        forecast(series=series(frequency="P" + "1" * 300_000 + "D")), status=422
    ),
    # Work bounded before it starts: grids sized from timestamps, frequency and aggregation.
    "three-timestamps-500-years-apart-at-a-minute": case(
        forecast(series=sparse("1700-01-01T00:00", "1900-01-01T00:00", "2200-01-01T00:00")),
        status=422,
        field="series.frequency",
    ),
    "one-year-at-a-second-from-three-values": case(
        forecast(series=sparse("2024-01-01", "2024-06-01", "2025-01-01", frequency="PT1S")),
        status=422,
        field="series.frequency",
    ),
    "aggregate-to-a-finer-step": case(
        forecast(series=series(aggregate={"frequency": "PT1S"})),
        status=422,
        field="series.aggregate.frequency",
    ),
    "aggregate-to-a-coarser-step": case(
        forecast(series=series(aggregate={"frequency": "W-MON", "method": "mean"})), status=200
    ),
    "diagnostics-of-a-grid-too-large": case(
        {
            "series": {
                "timestamps": ["2000-01-01", "2100-01-01", "2200-01-01"],
                "values": [1, 2, 3],
                "frequency": "PT1M",
            }
        },
        path="/v1/diagnostics",
        status=422,
        field="series.frequency",
    ),
    # Dates outside the nanosecond range the keys and the statistics use.
    "timestamps-in-year-1": case(
        forecast(
            series={"timestamps": ["0001-01-01", "0001-01-02", "0001-01-03"], "values": [1, 2, 3]}
        ),
        status=422,
        field="series.timestamps[0]",
    ),
    "start-in-year-9999": case(
        forecast(series=series(start="9999-01-01")), status=422, field="series.start"
    ),
    "series-running-past-2261": case(
        forecast(series=series(start="2261-12-01")), status=422, field="series.start"
    ),
    "horizon-running-past-2261": case(
        forecast(series=series(start="2258-01-01", frequency="MS"), horizon=24),
        status=422,
        field="horizon",
    ),
    # Frequencies that overflow or that the service does not support.
    # Values near the float64 range.
    "values-at-plus-and-minus-1e308-diagnosed": case(
        {"series": series(values=[1e308, -1e308] * 20)},
        path="/v1/diagnostics",
        status=422,
        field="series.values[0]",
    ),
    "values-at-1e300-backtested": case(
        {"series": series(values=[1e300 + i for i in range(40)]), "horizon": 2},
        path="/v1/backtests",
        status=422,
        field="series.values[0]",
    ),
    "values-all-1e-300": case(forecast(series=series(values=[1e-300] * 40))),
    "values-all-1e-300-auto": case(forecast("auto", series=series(values=[1e-300] * 40))),
    "values-all-1e-300-box-cox-estimated": case(
        forecast({"family": "ets"}, series=series(values=[1e-300] * 40), transform="boxcox"),
        status=422,
        field="transform",
    ),
    "values-all-1e-300-diagnosed": case(
        {"series": series(values=[1e-300] * 40)}, path="/v1/diagnostics"
    ),
    "values-at-the-bound-auto": case(
        forecast("auto", series=series(values=[1e30 - i * 1e16 for i in range(40)]))
    ),
    "combination-weights-of-1e308": case(
        forecast(
            {
                "family": "combination",
                "members": [{"family": "naive"}, {"family": "mean"}],
                "weights": [1e308, 1e308],
            }
        ),
        status=200,
    ),
    "a-batch-holding-campaign-items": case(
        {
            "requests": [
                forecast(),
                forecast(series=series(start="9999-01-01")),
                forecast(coverage=[0.9999999999999999]),
            ]
        },
        path="/v1/forecast-batches",
    ),
    # Whole numbers written with a fraction are the numbers they name.
    "horizon-written-3.0": case(forecast(horizon=3.0), status=200),
    "horizon-written-3.5": case(forecast(horizon=3.5), status=422, field="horizon"),
    "horizon-written-1e300": case(forecast(horizon=1e300), status=422, field="horizon"),
    "seasonal-period-written-7.0": case(forecast(series=series(seasonal_period=7.0)), status=200),
    "max-lag-written-5.0": case(
        {"series": series(), "max_lag": 5.0}, path="/v1/diagnostics", status=200
    ),
}


CASES.update(
    {
        name: case(forecast(series=series(frequency=text)), status=422, field="series.frequency")
        for name, text in REFUSED_FREQUENCIES.items()
    }
)
CASES["alias-multiple-of-six-digits"] = case(
    forecast(series=series(frequency="999999D")), status=422, field="series.start"
)


@pytest.fixture(scope="module")
def limited(shared_client: Callable[..., TestClient]) -> TestClient:
    return shared_client(**LIMITS)


def finite_numbers(value: Any) -> bool:
    """Every number in a JSON value is finite (nulls allowed where the schema allows them)."""
    if isinstance(value, float):
        return math.isfinite(value)
    if isinstance(value, dict):
        return all(finite_numbers(v) for v in value.values())
    if isinstance(value, list):
        return all(finite_numbers(v) for v in value)
    return True


def check(response: Any, expected: Case) -> None:
    """A clean answer: the expected status, a problem naming the field, no long echo."""
    assert response.status_code < 500, response.text[:2000]
    if expected.status is not None:
        assert response.status_code == expected.status, response.text[:2000]
    assert len(response.content) < 20_000, "the answer echoes too much of the input"
    if response.status_code == 200:
        assert finite_numbers(response.json())
        return
    assert response.headers["content-type"] == "application/problem+json"
    problem = response.json()
    assert problem["status"] == response.status_code
    assert problem["errors"], problem
    if expected.field is not None:
        assert problem["errors"][0]["field"] == expected.field, problem
    if expected.message is not None:
        assert expected.message in problem["errors"][0]["message"], problem
    if response.status_code == 400:
        assert problem["errors"][0]["field"] == "body"


@pytest.mark.parametrize("name", list(CASES))
def test_the_campaign_case_gets_a_clean_answer(limited: TestClient, name: str) -> None:
    expected = CASES[name]
    response = limited.post(
        expected.path, content=expected.body, headers={"content-type": "application/json"}
    )
    check(response, expected)


SPELLINGS = {
    # written: (start, canonical echo)
    "M": ("2024-01-31", "ME"),
    "m": ("2024-01-31", "ME"),
    "Q": ("2024-03-31", "QE-DEC"),
    "q": ("2024-03-31", "QE-DEC"),
    "Y": ("2024-12-31", "YE-DEC"),
    "A": ("2024-12-31", "YE-DEC"),
    "a": ("2024-12-31", "YE-DEC"),
    "AS": ("2024-01-01", "YS-JAN"),
    "H": ("2024-01-01T00:00:00", "h"),
    "h": ("2024-01-01T00:00:00", "h"),
    "T": ("2024-01-01T00:00:00", "min"),
    "15T": ("2024-01-01T00:00:00", "15min"),
    "S": ("2024-01-01T00:00:00", "s"),
    "s": ("2024-01-01T00:00:00", "s"),
    "Q-JUN": ("2024-06-30", "QE-JUN"),
}


@pytest.mark.parametrize("written", list(SPELLINGS))
def test_frequency_spellings_people_write_are_read_and_echoed_canonically(
    limited: TestClient, written: str
) -> None:
    start, canonical = SPELLINGS[written]
    body = forecast(series=series(start=start, frequency=written))
    answer = limited.post("/v1/forecasts", json=body)
    assert answer.status_code == 200, answer.text
    assert answer.json()["frequency"] == canonical
    diagnosed = limited.post("/v1/diagnostics", json={"series": body["series"]})
    assert diagnosed.status_code == 200, diagnosed.text
    assert diagnosed.json()["summary"]["frequency"] == canonical


def test_huge_combination_weights_give_the_equal_weight_forecast(limited: TestClient) -> None:
    members = [{"family": "naive"}, {"family": "mean"}]
    huge = limited.post(
        "/v1/forecasts",
        json=forecast({"family": "combination", "members": members, "weights": [1e308, 1e308]}),
    )
    equal = limited.post(
        "/v1/forecasts", json=forecast({"family": "combination", "members": members})
    )
    assert huge.status_code == equal.status_code == 200
    assert huge.json()["point"] == equal.json()["point"]
    assert min(huge.json()["point"]) > 1.0
