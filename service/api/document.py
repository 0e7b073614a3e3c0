"""The app's OpenAPI document beyond what FastAPI derives: the specification schemas built
from the model registry, the CSV and chart representations, and the limits from the
settings written in as schema bounds."""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

from fastapi import FastAPI

from service.api.media import describe_representations
from service.api.problems import PROBLEM_MEDIA_TYPE
from service.api.schemas.specification import add_specification_schemas
from service.config import Settings


def limit_bounds(settings: Settings) -> dict[tuple[str, str], dict[str, int]]:
    """(schema, property) -> the JSON Schema bounds this instance enforces from its settings."""
    points = {"maxItems": settings.max_points}
    horizon = {"maximum": settings.max_horizon}
    return {
        ("SeriesIn", "values"): points,
        ("SeriesIn", "timestamps"): points,
        ("SeriesIn", "seasonal_period"): {"maximum": settings.max_points},
        ("RegressorIn", "history"): points,
        ("RegressorIn", "future"): {"maxItems": settings.max_horizon},
        ("ForecastRequest", "horizon"): horizon,
        ("BatchEntry", "horizon"): horizon,
        ("BacktestRequest", "horizon"): horizon,
        ("BatchRequest", "requests"): {"maxItems": settings.max_batch_series},
    }


def _bound(node: dict[str, Any], bounds: dict[str, int]) -> None:
    """Set ``bounds`` on the array or integer branch of a property (or of its anyOf)."""
    for branch in [node, *node.get("anyOf", [])]:
        kind = branch.get("type")
        if kind == "array" and "maxItems" in bounds:
            branch["maxItems"] = bounds["maxItems"]
        if kind in ("integer", "number") and "maximum" in bounds:
            branch["maximum"] = bounds["maximum"]


def install_limits(app: FastAPI, settings: Settings) -> None:
    """Make ``app.openapi()`` state the settings' limits as maxItems and maximum bounds."""
    build: Callable[[], dict[str, Any]] = app.openapi
    bounds = limit_bounds(settings)

    def openapi() -> dict[str, Any]:
        schema = build()
        components = schema.get("components", {}).get("schemas", {})
        for (name, prop), bound in bounds.items():
            node = components.get(name, {}).get("properties", {}).get(prop)
            if node is not None:
                _bound(node, bound)
        return schema

    app.openapi = openapi  # type: ignore[method-assign]


def problem_schemas(document: dict[str, Any]) -> dict[str, Any]:
    """Every problem answer described under the media type it is sent with: FastAPI files a
    response model under application/json, and a problem+json entry is left without one."""
    ref = {"$ref": "#/components/schemas/Problem"}
    for operations in document.get("paths", {}).values():
        for operation in operations.values():
            for response in operation.get("responses", {}).values():
                content = response.get("content", {})
                if PROBLEM_MEDIA_TYPE not in content:
                    continue
                if content.get("application/json", {}).get("schema") == ref:
                    del content["application/json"]
                content[PROBLEM_MEDIA_TYPE] = {**content[PROBLEM_MEDIA_TYPE], "schema": ref}
    return document


def install_document(
    app: FastAPI,
    settings: Settings,
    amend: Callable[[dict[str, Any]], dict[str, Any]] = lambda document: document,
) -> None:
    """Make ``app.openapi()`` carry the specifications, representations and bounds;
    ``amend`` adds what a route describes itself (the batch request's schemas)."""
    build = app.openapi

    def with_specifications() -> dict[str, Any]:
        if app.openapi_schema is None:
            document = describe_representations(add_specification_schemas(build()))
            document = problem_schemas(document)
            app.openapi_schema = amend(document)
        return app.openapi_schema

    app.openapi = with_specifications  # type: ignore[method-assign]
    install_limits(app, settings)
