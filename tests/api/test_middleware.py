"""Request ids and the body limit, seen from a client."""

from __future__ import annotations

import json
import re
from collections.abc import Callable, Iterator
from typing import Any

import pytest
from fastapi.testclient import TestClient

from service import demo

PATH = "/v1/forecasts"
LIMIT = 3_000


@pytest.fixture(scope="module")
def small(shared_client: Callable[..., TestClient]) -> TestClient:
    """An app whose body limit is LIMIT bytes."""
    return shared_client(max_body_bytes=LIMIT)


def body_of_size(size: int) -> bytes:
    """A valid forecast request padded with spaces to exactly ``size`` bytes."""
    body = demo.request_body("orders")
    body["series"]["values"] = body["series"]["values"][:30]
    body["model"] = {"family": "naive"}
    text = json.dumps(body).encode()
    assert len(text) <= size
    return text + b" " * (size - len(text))


def chunks(data: bytes, size: int = 700) -> Iterator[bytes]:
    for i in range(0, len(data), size):
        yield data[i : i + size]


def post(client: TestClient, content: Any, **headers: str) -> Any:
    return client.post(
        PATH, content=content, headers={"content-type": "application/json", **headers}
    )


def test_a_well_formed_request_id_is_echoed(client: TestClient) -> None:
    response = client.get("/healthz", headers={"x-request-id": "batch-7.step:3"})
    assert response.headers["x-request-id"] == "batch-7.step:3"


@pytest.mark.parametrize("given", ["", "has space", "x" * 129, "semi;colon", "slash/inside"])
def test_a_malformed_request_id_is_replaced(client: TestClient, given: str) -> None:
    response = client.get("/healthz", headers={"x-request-id": given})
    made = response.headers["x-request-id"]
    assert made != given
    assert re.fullmatch(r"[0-9a-f]{32}", made)


def test_each_request_gets_its_own_id(client: TestClient) -> None:
    ids = {client.get("/healthz").headers["x-request-id"] for _ in range(5)}
    assert len(ids) == 5


def test_a_problem_carries_the_request_id_of_its_response(client: TestClient) -> None:
    response = client.get("/nowhere", headers={"x-request-id": "trace-1"})
    assert response.json()["request_id"] == "trace-1"
    assert response.headers.get_list("x-request-id") == ["trace-1"]


def test_a_body_at_the_limit_is_read(small: TestClient) -> None:
    response = post(small, body_of_size(LIMIT))
    assert response.status_code == 200, response.text
    assert response.json()["model"]["family"] == "naive"
    assert len(response.json()["point"]) == demo.orders().horizon


def test_a_body_one_byte_over_the_limit_is_refused(small: TestClient) -> None:
    response = post(small, body_of_size(LIMIT + 1), **{"x-request-id": "big-1"})
    assert response.status_code == 413
    assert response.json()["code"] == "body_too_large"
    assert response.json()["request_id"] == "big-1"
    assert response.headers.get_list("x-request-id") == ["big-1"]


def test_a_streamed_body_under_the_limit_reaches_the_route(small: TestClient) -> None:
    response = post(small, chunks(body_of_size(LIMIT)))
    assert response.status_code == 200, response.text
    assert len(response.json()["point"]) == demo.orders().horizon


def test_a_streamed_body_over_the_limit_is_refused_without_a_length(small: TestClient) -> None:
    response = post(small, chunks(body_of_size(LIMIT + 500)))
    assert response.status_code == 413
    assert response.headers["content-type"].startswith("application/problem+json")
    assert response.json()["errors"] == [{"field": "body", "message": f"at most {LIMIT} bytes"}]


def test_a_lying_small_content_length_does_not_get_past_the_count(small: TestClient) -> None:
    # The declared length is under the limit; the bytes that arrive are counted anyway.
    response = post(small, chunks(body_of_size(LIMIT * 2)), **{"content-length": "10"})
    assert response.status_code == 413
    assert response.json()["code"] == "body_too_large"
    assert response.json()["errors"] == [{"field": "body", "message": f"at most {LIMIT} bytes"}]


def test_headers_over_the_cap_are_a_431_problem(shared_client: Callable[..., TestClient]) -> None:
    capped = shared_client(max_header_bytes=2_048)
    response = capped.get("/healthz", headers={"x-padding": "p" * 3_000, "x-request-id": "big"})
    assert response.status_code == 431
    assert response.headers["content-type"] == "application/problem+json"
    problem = response.json()
    assert problem["code"] == "headers_too_large"
    assert problem["errors"] == [{"field": "headers", "message": "at most 2048 bytes"}]
    assert problem["request_id"] == response.headers["x-request-id"] == "big"
    assert capped.get("/healthz", headers={"x-padding": "p" * 1_000}).status_code == 200
