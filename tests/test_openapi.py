"""The committed openapi/openapi.json is the schema the app serves now."""

from __future__ import annotations

import json
from pathlib import Path

from service.api.openapi import schema_text

COMMITTED = Path(__file__).resolve().parents[1] / "openapi" / "openapi.json"
FIX = "run `windvane openapi openapi/openapi.json` and commit the result"


def test_the_committed_schema_is_current() -> None:
    assert COMMITTED.exists(), f"openapi/openapi.json is missing: {FIX}"
    assert COMMITTED.read_text(encoding="utf-8") == schema_text(), (
        f"openapi/openapi.json is stale: {FIX}"
    )


def test_the_schema_names_the_problem_responses() -> None:
    schema = json.loads(schema_text())
    responses = schema["paths"]["/v1/forecasts"]["post"]["responses"]
    for status in ("400", "413", "422", "503"):
        assert "application/problem+json" in responses[status]["content"], status
