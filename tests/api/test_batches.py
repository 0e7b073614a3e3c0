"""POST /v1/forecast-batches: items failing alone, NDJSON lines, the batch time budget and
the portfolio summary (TestClient; the live stream is timed in tests/test_batch_stream.py)."""

from __future__ import annotations

import json
from typing import Any

from service import demo
from service.api.schemas.batches import BatchClosing, BatchItem, BatchResponse

NDJSON = {"accept": "application/x-ndjson"}


def naive(name: str, ident: str, horizon: int = 3) -> dict[str, Any]:
    body = demo.request_body(name, horizon=horizon)
    body["model"] = {"family": "naive"}
    body["id"] = ident
    return body


def test_a_schema_error_of_one_item_is_that_items_problem(client: Any) -> None:
    bad = naive("orders", "second")
    bad["horizon"] = "soon"
    items = [naive("orders", "first"), bad, 17, {**naive("fuel", "fourth"), "colour": "red"}]
    response = client.post("/v1/forecast-batches", json={"requests": items})
    assert response.status_code == 200, response.text
    found = BatchResponse.model_validate(response.json())
    assert [r.index for r in found.results] == [0, 1, 2, 3]
    assert [r.id for r in found.results] == ["first", "second", None, "fourth"]
    assert [r.status for r in found.results] == [200, 422, 422, 422]
    assert (found.succeeded, found.failed, found.not_run) == (1, 3, 0)
    fields = [r.problem.errors[0].field for r in found.results[1:] if r.problem]
    assert fields == ["requests[1].horizon", "requests[2]", "requests[3].colour"]


def test_ndjson_gives_one_line_per_item_then_the_closing_line(client: Any) -> None:
    items = [naive("orders", "a"), naive("fuel", "b"), {"id": "c", "series": {"values": [1]}}]
    with client.stream(
        "POST", "/v1/forecast-batches", json={"requests": items}, headers=NDJSON
    ) as response:
        assert response.status_code == 200
        assert response.headers["content-type"].startswith("application/x-ndjson")
        lines = [json.loads(line) for line in response.iter_lines() if line]
    assert len(lines) == 4
    answered = [BatchItem.model_validate(line) for line in lines[:3]]
    assert sorted(a.id or "" for a in answered) == ["a", "b", "c"]
    by_id = {a.id: a for a in answered}
    assert by_id["a"].forecast is not None and len(by_id["a"].forecast.point) == 3
    assert by_id["c"].status == 422
    closing = BatchClosing.model_validate(lines[3])
    assert (closing.succeeded, closing.failed, closing.not_run) == (2, 1, 0)
    assert closing.summary.verdicts["not_assessed"] == 2


def test_items_after_the_batch_time_budget_are_not_run(make_client: Any) -> None:
    items = [naive("orders", "a"), naive("fuel", "b")]
    with make_client(batch_seconds=1e-9) as client:
        found = client.post("/v1/forecast-batches", json={"requests": items}).json()
    assert [r["status"] for r in found["results"]] == [503, 503]
    assert {r["problem"]["code"] for r in found["results"]} == {"not_run"}
    assert (found["succeeded"], found["failed"], found["not_run"]) == (0, 0, 2)
    assert found["summary"]["not_run"] == 2


def test_the_portfolio_summary_counts_verdicts_and_names_the_least_skilful(client: Any) -> None:
    auto = demo.request_body("energy", horizon=3)
    auto["id"] = "energy"
    items = [auto, naive("orders", "orders")]
    found = client.post("/v1/forecast-batches", json={"requests": items}).json()
    summary = found["summary"]
    assert summary["series"] == summary["answered"] == 2
    assert summary["verdicts"]["not_assessed"] == 1
    skill = found["results"][0]["forecast"]["selection"]["skill_over_naive"]
    assert summary["median_skill_over_naive"] == skill
    assert summary["least_skill"] == [{"series_id": "energy", "skill_over_naive": skill}]


def test_a_body_that_is_not_a_batch_is_refused_whole(client: Any) -> None:
    cut = client.post(
        "/v1/forecast-batches",
        content=b'{"requests": [',
        headers={"content-type": "application/json"},
    )
    assert cut.status_code == 400
    assert cut.json()["code"] == "malformed_json"
    empty = client.post("/v1/forecast-batches", json={"requests": []})
    assert empty.status_code == 422
    assert empty.json()["errors"][0]["field"] == "requests"
    other = client.post("/v1/forecast-batches", json=[1, 2])
    assert other.status_code == 422


def test_batches_have_their_own_body_limit(make_client: Any) -> None:
    one = naive("orders", "a")
    size = len(json.dumps({"requests": [one]}, separators=(",", ":")))
    with make_client(max_body_bytes=size - 100, max_batch_body_bytes=size + 100) as client:
        assert client.post("/v1/forecasts", json=one).status_code == 413
        assert client.post("/v1/forecast-batches", json={"requests": [one]}).status_code == 200
        twice = client.post("/v1/forecast-batches", json={"requests": [one, one]})
        assert twice.status_code == 413
