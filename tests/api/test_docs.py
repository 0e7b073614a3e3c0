"""API documentation that works on an isolated network, and plain operation ids."""

from __future__ import annotations

import re

import pytest
from fastapi.testclient import TestClient

EXTERNAL = re.compile(r"(?:https?:)?//(?!localhost|127\.0\.0\.1)[a-z0-9.-]+\.[a-z]{2,}", re.I)


@pytest.mark.parametrize("page", ["/docs", "/redoc"])
def test_docs_pages_reference_no_external_host(client: TestClient, page: str) -> None:
    response = client.get(page)
    assert response.status_code == 200
    html = response.text
    assert EXTERNAL.findall(html) == []
    assets = re.findall(r'(?:src|href)="([^"]+)"', html)
    assert assets, "the page loads its scripts from somewhere"
    for asset in assets:
        assert asset.startswith("/docs/assets/")
        assert client.get(asset).status_code == 200


def test_operation_ids_are_plain_words(client: TestClient) -> None:
    document = client.get("/openapi.json").json()
    ids = {
        operation["operationId"]
        for item in document["paths"].values()
        for operation in item.values()
    }
    assert {"create_forecast", "create_diagnostics", "create_backtest"} <= ids
    assert all(re.fullmatch(r"[a-z]+(?:_[a-z]+)*", i) for i in ids), ids


def test_the_document_states_the_tables_and_charts(client: TestClient) -> None:
    document = client.get("/openapi.json").json()
    forecast = document["paths"]["/v1/forecasts"]["post"]
    assert {"application/json", "text/csv"} <= set(forecast["requestBody"]["content"])
    assert {"text/csv", "image/svg+xml", "image/png"} <= set(
        forecast["responses"]["200"]["content"]
    )
    assert {"406", "415"} <= set(forecast["responses"])
