"""The committed openapi/openapi.json is the schema the app serves now."""

from __future__ import annotations

import json
from pathlib import Path
from typing import Any

from service.api.openapi import schema_text
from service.core.models.registry import catalogue

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


def _open_objects(value: Any, path: str = "") -> list[str]:
    """Where the document has an object whose members it does not describe."""
    found: list[str] = []
    if isinstance(value, dict):
        untyped = value.get("type") == "object" and not (
            "properties" in value or "additionalProperties" in value
        )
        if value.get("additionalProperties") is True or untyped:
            found.append(path)
        for key, item in value.items():
            found.extend(_open_objects(item, f"{path}/{key}"))
    elif isinstance(value, list):
        for i, item in enumerate(value):
            found.extend(_open_objects(item, f"{path}[{i}]"))
    return found


def test_every_response_field_is_described() -> None:
    schema = json.loads(schema_text())
    assert _open_objects(schema) == []
    for path, operations in schema["paths"].items():
        for method, operation in operations.items():
            content = operation["responses"]["200"]["content"]
            for media, body in content.items():
                described = body.get("schema", {})
                assert "$ref" in described or "type" in described, (path, method, media)
    assert _open_objects({"type": "object", "additionalProperties": True}) == [""]


def test_the_specification_schema_lists_each_familys_parameters() -> None:
    schema = json.loads(schema_text())["components"]["schemas"]
    branches = {b["title"]: b for b in schema["Specification"]["oneOf"]}
    for entry in catalogue():
        branch = branches[entry.family]
        names = {p.name for p in entry.parameters}
        assert set(branch["properties"]) == {"family", *names}, entry.family
        assert branch["additionalProperties"] is False
    answered = {b["title"]: b for b in schema["FittedSpecification"]["oneOf"]}
    assert all("transform" in b["properties"] for b in answered.values())
