"""Behind a gateway under a path prefix (WINDVANE_ROOT_PATH): docs, schema and problems."""

from __future__ import annotations

from collections.abc import Callable

import pytest
from fastapi.testclient import TestClient

from service.api.auth import key_digest

PREFIX = "/forecasting"


@pytest.fixture(scope="module")
def prefixed(shared_client: Callable[..., TestClient]) -> TestClient:
    """An app configured with the gateway's prefix."""
    return shared_client(root_path=PREFIX)


@pytest.mark.parametrize("sent", ["", PREFIX], ids=["gateway-strips-the-prefix", "prefix-kept"])
def test_docs_point_at_the_prefixed_schema(prefixed: TestClient, sent: str) -> None:
    page = prefixed.get(f"{sent}/docs")
    assert page.status_code == 200
    assert f"'{PREFIX}/openapi.json'" in page.text


def test_the_schema_names_the_prefix_as_its_server(prefixed: TestClient) -> None:
    schema = prefixed.get("/openapi.json").json()
    assert schema["servers"] == [{"url": PREFIX}]


@pytest.mark.parametrize("sent", ["", PREFIX], ids=["gateway-strips-the-prefix", "prefix-kept"])
def test_problem_instances_carry_the_prefix(prefixed: TestClient, sent: str) -> None:
    invalid = prefixed.post(f"{sent}/v1/forecasts", json={"horizon": 3})
    assert invalid.status_code == 422
    assert invalid.json()["instance"] == f"{PREFIX}/v1/forecasts"
    missing = prefixed.get(f"{sent}/v1/nowhere")
    assert missing.status_code == 404
    assert missing.json()["instance"] == f"{PREFIX}/v1/nowhere"


def test_without_a_prefix_nothing_changes(client: TestClient) -> None:
    assert "servers" not in client.get("/openapi.json").json()
    assert client.get("/v1/nowhere").json()["instance"] == "/v1/nowhere"


@pytest.mark.parametrize("sent", ["", PREFIX], ids=["gateway-strips-the-prefix", "prefix-kept"])
def test_api_keys_still_guard_the_prefixed_paths(
    shared_client: Callable[..., TestClient], sent: str
) -> None:
    guarded = shared_client(root_path=PREFIX, api_keys=key_digest("gateway-key"))
    refused = guarded.post(f"{sent}/v1/forecasts", json={"horizon": 3})
    assert refused.status_code == 401
    assert refused.json()["instance"] == f"{PREFIX}/v1/forecasts"
    accepted = guarded.post(
        f"{sent}/v1/forecasts",
        json={"horizon": 3},
        headers={"authorization": "Bearer gateway-key"},
    )
    assert accepted.status_code == 422
