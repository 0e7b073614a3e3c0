"""POST /v1/forecasts on the demo scenario: the response contract, and corruption properties.

Valid requests use the benchmark families (fast); one request lets the service choose.
"""

from __future__ import annotations

import itertools
import json
from collections.abc import Callable
from typing import Any

import numpy as np
import pandas as pd
import pytest
from fastapi.testclient import TestClient
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from service import demo
from service.api.schemas.common import SeriesIn
from service.api.schemas.forecasts import ForecastRequest, ForecastResponse
from service.core.data.series import parse_series

PATH = "/v1/forecasts"
BENCHMARKS = ("mean", "naive", "seasonal_naive", "drift")


def demo_request(name: str, family: str | None, **extra: Any) -> dict[str, Any]:
    """The demo body for ``name`` with an explicit benchmark family (or auto)."""
    body = demo.request_body(name)
    body["model"] = {"family": family} if family else "auto"
    body.update(extra)
    return body


def expected_future(body: dict[str, Any]) -> pd.DatetimeIndex:
    """The horizon's timestamps, continuing the parsed series at its frequency."""
    series = body["series"]
    parsed = parse_series(series["values"], start=series["start"], frequency=series["frequency"])
    index = parsed.y.index
    return pd.date_range(index[-1] + index.freq, periods=body["horizon"], freq=index.freq)


def check_bounds(answer: dict[str, Any]) -> None:
    """lower <= point <= upper at every level, and narrower levels inside wider ones."""
    point = np.asarray(answer["point"], dtype=float)
    intervals = sorted(answer["intervals"], key=lambda i: i["coverage"])
    for interval in intervals:
        lower = np.asarray(interval["lower"], dtype=float)
        upper = np.asarray(interval["upper"], dtype=float)
        assert np.all(lower <= point) and np.all(point <= upper)
    for narrow, wide in itertools.pairwise(intervals):
        assert np.all(np.asarray(wide["lower"]) <= np.asarray(narrow["lower"]))
        assert np.all(np.asarray(narrow["upper"]) <= np.asarray(wide["upper"]))


@pytest.mark.parametrize("family", BENCHMARKS)
@pytest.mark.parametrize("name", list(demo.SCENARIO))
def test_demo_forecast_keeps_the_contract(client: TestClient, name: str, family: str) -> None:
    body = demo_request(name, family)
    response = client.post(PATH, json=body)
    assert response.status_code == 200, response.text
    assert response.headers["content-type"] == "application/json"
    answer = response.json()
    ForecastResponse.model_validate(answer)
    assert answer["model"]["family"] == family
    assert answer["name"] == body["series"]["name"]
    future = pd.DatetimeIndex(pd.to_datetime(answer["timestamps"], format="ISO8601"))
    assert future.equals(expected_future(body))
    assert len(answer["point"]) == body["horizon"]
    assert [i["coverage"] for i in answer["intervals"]] == [0.8, 0.95]
    check_bounds(answer)
    assert answer["provenance"]["data_hash"].startswith("sha256:")
    assert answer["model"]["observations"] == len(body["series"]["values"])


def test_the_service_chooses_a_model_when_asked(client: TestClient) -> None:
    body = demo_request("orders", None, horizon=6)
    body["series"]["values"] = body["series"]["values"][:60]  # under two seasons: a quick search
    response = client.post(PATH, json=body)
    assert response.status_code == 200, response.text
    answer = response.json()
    ForecastResponse.model_validate(answer)
    assert len(answer["point"]) == 6
    check_bounds(answer)


def test_an_aware_hourly_series_keeps_its_offset(client: TestClient) -> None:
    stamps = [
        t.isoformat() for t in pd.date_range("2025-03-03T00:00:00+05:30", periods=72, freq="h")
    ]
    values = demo.requests().values[:72]
    body = {
        "series": {"timestamps": stamps, "values": values},
        "horizon": 3,
        "model": {"family": "seasonal_naive"},
    }
    answer = client.post(PATH, json=body).json()
    assert answer["timestamps"] == [
        "2025-03-06T00:00:00+05:30",
        "2025-03-06T01:00:00+05:30",
        "2025-03-06T02:00:00+05:30",
    ]
    assert answer["point"] == values[48:51]


def test_naive_on_kept_missing_values_uses_the_last_observation(client: TestClient) -> None:
    body = {
        "series": {
            "start": "2025-01-06",
            "frequency": "P1W",
            "missing": "keep",
            "values": [412.0, 398.0, 455.0, 430.0, None],
        },
        "horizon": 2,
        "model": {"family": "naive"},
    }
    response = client.post(PATH, json=body)
    assert response.status_code == 200, response.text
    assert response.json()["point"] == [430.0, 430.0]


def test_fitted_values_and_residuals_on_request(client: TestClient) -> None:
    body = demo_request("fuel", "naive", include=["fitted", "residuals"])
    answer = client.post(PATH, json=body).json()
    n = len(body["series"]["values"])
    assert len(answer["fitted"]) == len(answer["residuals"]) == n
    assert answer["fitted"][0] is None  # naive has no value before the first
    assert answer["fitted"][1:] == body["series"]["values"][:-1]


def test_coverage_levels_come_back_sorted(client: TestClient) -> None:
    answer = client.post(PATH, json=demo_request("energy", "drift", coverage=[0.95, 0.5])).json()
    assert [i["coverage"] for i in answer["intervals"]] == [0.5, 0.95]
    check_bounds(answer)


def test_the_same_request_gets_the_same_forecast(client: TestClient) -> None:
    body = demo_request("parcels", "seasonal_naive")
    first, second = client.post(PATH, json=body).json(), client.post(PATH, json=body).json()
    assert first["point"] == second["point"] and first["intervals"] == second["intervals"]
    assert first["provenance"]["data_hash"] == second["provenance"]["data_hash"]


# --- corruption properties -----------------------------------------------------------------

CORRUPT = settings(
    max_examples=150,
    derandomize=True,
    database=None,
    deadline=None,
    suppress_health_check=[HealthCheck.too_slow, HealthCheck.filter_too_much],
)
HOLE = "__HOLE__"
Path = tuple[Any, ...]


def base_bodies() -> list[dict[str, Any]]:
    """Small valid requests in both wire forms, from the demo scenario."""
    orders, energy = demo.orders(), demo.energy()
    stamps = pd.date_range(energy.start, periods=24, freq="MS").strftime("%Y-%m-%d").tolist()
    return [
        {
            "series": {
                "start": orders.start,
                "frequency": "P1W",
                "values": orders.values[:30],
                "name": orders.label,
            },
            "horizon": 5,
            "coverage": [0.8, 0.95],
            "model": {"family": "naive"},
        },
        {
            "series": {"timestamps": stamps, "values": energy.values[:24], "missing": "keep"},
            "horizon": 3,
            "coverage": [0.9],
            "model": {"family": "seasonal_naive"},
        },
    ]


BASES = base_bodies()
for valid in BASES:
    ForecastRequest.model_validate(valid)  # the bases themselves must be valid requests
REQUIRED = {
    0: [
        ("series",),
        ("horizon",),
        ("series", "values"),
        ("series", "start"),
        ("series", "frequency"),
    ],
    1: [("series",), ("horizon",), ("series", "values"), ("series", "timestamps")],
}


def leaves(value: Any, path: Path = ()) -> list[tuple[Path, Any]]:
    """Every (path, value) in a JSON document, containers included, root excluded."""
    out: list[tuple[Path, Any]] = [(path, value)] if path else []
    if isinstance(value, dict):
        for key, item in value.items():
            out.extend(leaves(item, (*path, key)))
    elif isinstance(value, list):
        for i, item in enumerate(value):
            out.extend(leaves(item, (*path, i)))
    return out


def kind(value: Any) -> str:
    if value is None:
        return "null"
    if isinstance(value, bool):
        return "boolean"
    if isinstance(value, (int, float)):
        return "number"
    return {str: "string", list: "array", dict: "object"}[type(value)]


def set_at(body: Any, path: Path, value: Any) -> None:
    target = body
    for key in path[:-1]:
        target = target[key]
    target[path[-1]] = value


def delete_at(body: Any, path: Path) -> None:
    target = body
    for key in path[:-1]:
        target = target[key]
    del target[path[-1]]


garbage = st.recursive(
    st.none() | st.booleans() | st.integers(-3, 3) | st.text(max_size=3),
    lambda inner: (
        st.lists(inner, max_size=3) | st.dictionaries(st.text(max_size=3), inner, max_size=3)
    ),
    max_leaves=12,
)
OF_KIND: dict[str, st.SearchStrategy[Any]] = {
    "boolean": st.booleans(),
    "number": st.integers(-5, 5) | st.floats(-1e6, 1e6),
    "string": st.text(max_size=6).filter(lambda s: s != "auto"),
    "array": st.lists(garbage, max_size=3),
    "object": st.dictionaries(st.text(max_size=4), garbage, max_size=3),
}


def copy_of(index: int) -> dict[str, Any]:
    body: dict[str, Any] = json.loads(json.dumps(BASES[index]))
    return body


@st.composite
def corrupted(draw: st.DrawFn) -> str:
    """The JSON text of a base request broken in exactly one way that makes it invalid."""
    index = draw(st.sampled_from(range(len(BASES))))
    body = copy_of(index)
    how = draw(
        st.sampled_from(["drop", "retype", "literal", "order", "extra", "boolean", "garbage"])
    )
    if how == "drop":
        delete_at(body, draw(st.sampled_from(REQUIRED[index])))
    elif how == "retype":
        path, value = draw(st.sampled_from(leaves(body)))
        other = draw(st.sampled_from(sorted(set(OF_KIND) - {kind(value)})))
        set_at(body, path, draw(OF_KIND[other]))
    elif how == "literal":
        numeric = [p for p, v in leaves(body) if kind(v) == "number"]
        set_at(body, draw(st.sampled_from(numeric)), HOLE)
        token = draw(st.sampled_from(["NaN", "Infinity", "-Infinity", "1e400", "-1e400"]))
        return json.dumps(body).replace(f'"{HOLE}"', token)
    elif how == "order":
        key = "timestamps" if index == 1 else None
        stamps = body["series"][key] if key else None
        if stamps is None:  # the start form has no timestamps: give it duplicated ones
            values = body["series"]["values"]
            start = pd.Timestamp(body["series"].pop("start"))
            stamps = (
                pd.date_range(start, periods=len(values), freq="W-MON")
                .strftime("%Y-%m-%d")
                .tolist()
            )
            body["series"]["timestamps"] = stamps
        i = draw(st.integers(1, len(stamps) - 1))
        if draw(st.booleans()):
            stamps[i] = stamps[i - 1]
        else:
            order = draw(st.permutations(range(len(stamps))))
            if list(order) == sorted(order):
                order = [*order[1:], order[0]]
            body["series"]["timestamps"] = [stamps[j] for j in order]
    elif how == "extra":
        objects = [
            (body, set(ForecastRequest.model_fields)),
            (body["series"], set(SeriesIn.model_fields)),
            (body["model"], {"family"}),
        ]
        target, known = draw(st.sampled_from(objects))
        name = draw(st.text(min_size=1, max_size=8).filter(lambda k: k not in known))
        target[name] = draw(garbage)
    elif how == "boolean":
        i = draw(st.integers(0, len(body["series"]["values"]) - 1))
        body["series"]["values"][i] = draw(st.booleans())
    else:
        path, _ = draw(st.sampled_from(leaves(body)))
        nested: Any = draw(garbage)
        for _ in range(draw(st.integers(2, 6))):
            nested = [nested] if draw(st.booleans()) else {"x": nested}
        set_at(body, path, nested)
    return json.dumps(body)


def assert_client_problem(response: Any) -> None:
    """A 4xx RFC 9457 problem with an errors list, never a 5xx or a traceback."""
    assert 400 <= response.status_code < 500, response.text
    assert response.headers["content-type"].startswith("application/problem+json")
    problem = response.json()
    for key in ("type", "title", "status", "detail", "instance"):
        assert key in problem, key
    assert problem["status"] == response.status_code
    assert isinstance(problem["errors"], list)
    assert "Traceback" not in response.text and 'File "' not in response.text


def poster(client: TestClient) -> Callable[[str], Any]:
    return lambda text: client.post(
        PATH, content=text.encode(), headers={"content-type": "application/json"}
    )


@CORRUPT
@given(text=corrupted())
def test_any_corruption_is_a_client_problem(client: TestClient, text: str) -> None:
    assert_client_problem(poster(client)(text))


@settings(max_examples=40, derandomize=True, database=None, deadline=None)
@given(data=st.data())
def test_truncated_json_is_a_client_problem(client: TestClient, data: st.DataObject) -> None:
    text = json.dumps(BASES[data.draw(st.sampled_from(range(len(BASES))))])
    cut = data.draw(st.integers(0, len(text) - 1))
    assert_client_problem(poster(client)(text[:cut]))


def test_the_bases_are_answered(client: TestClient) -> None:
    for body in BASES:
        response = client.post(PATH, json=body)
        assert response.status_code == 200, response.text
        answer = ForecastResponse.model_validate(response.json())
        assert len(answer.point) == body["horizon"]
        assert [i.coverage for i in answer.intervals] == body["coverage"]
        assert answer.model.family == body["model"]["family"]


def test_library_versions_in_provenance_follow_the_setting(
    shared_client: Callable[..., TestClient],
) -> None:
    body = demo_request("orders", "naive")
    shown = shared_client().post(PATH, json=body).json()["provenance"]
    hidden = shared_client(library_versions=False).post(PATH, json=body).json()["provenance"]
    assert set(shown["library_versions"]) >= {"numpy", "pandas", "scipy", "statsmodels"}
    assert hidden["library_versions"] == {}
    assert hidden["data_hash"] == shown["data_hash"]


def test_a_family_name_alone_stands_for_its_defaults(client: TestClient) -> None:
    body = demo_request("orders", None, horizon=4)
    body["model"] = "naive"
    answer = client.post(PATH, json=body)
    assert answer.status_code == 200, answer.text
    assert answer.json()["model"]["label"] == "naive"
    assert "fitted as requested" in answer.json()["summary"]
    body["model"] = "nonsense"
    refused = client.post(PATH, json=body)
    assert refused.status_code == 422
    assert refused.json()["errors"][0]["field"].startswith("model")


def test_six_points_are_answered_by_auto_with_a_summary(client: TestClient) -> None:
    body = {
        "series": {"start": "2024-01-01", "frequency": "MS", "values": [3, 5, 4, 6, 8, 7]},
        "horizon": 3,
    }
    answer = client.post(PATH, json=body)
    assert answer.status_code == 200, answer.text
    data = answer.json()
    assert data["selection"]["chosen"] == data["model"]["label"]
    assert "simple_families_only" in [w["code"] for w in data["warnings"]]
    assert data["summary"].endswith(".")


def test_auto_ranks_by_every_metric_a_backtest_ranks_by(client: TestClient) -> None:
    # The two endpoints share one list, the core's: a backtest ranked by MAE can be followed
    # by a forecast chosen by MAE.
    from typing import get_args

    from service.api.schemas.common import RankingMetric
    from service.core.evaluation.scoring import POINT_METRICS

    assert get_args(RankingMetric) == POINT_METRICS
    body = demo_request("orders", None, horizon=4)
    body["series"]["values"] = body["series"]["values"][:40]
    body["metric"] = "mae"
    answer = client.post(PATH, json=body)
    assert answer.status_code == 200, answer.text
    assert answer.json()["selection"]["metric"] == "mae"


def test_a_jump_that_explodes_every_log_scale_forecast_is_refused_with_the_way_out(
    client: TestClient,
) -> None:
    rng = np.random.default_rng(1)
    values = 50 + rng.normal(size=13)
    values[-1] = 5000
    series = {"start": "1950-01-01", "frequency": "P1Y", "values": values.tolist()}
    refused = client.post(PATH, json={"series": series, "horizon": 24, "transform": "log"})
    assert refused.status_code == 422
    detail = refused.json()["detail"]
    assert "naive, on the log scale" in detail and "without the transform" in detail
    answered = client.post(PATH, json={"series": series, "horizon": 24})
    assert answered.status_code == 200, answered.text
