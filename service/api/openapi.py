"""The exported OpenAPI document (openapi/openapi.json is this text, committed), and the
limits from the settings written into it as schema bounds."""

from __future__ import annotations

import json
from collections.abc import Callable
from typing import Any

from fastapi import FastAPI

from service.config import Settings


def schema_text(settings: Settings | None = None) -> str:
    """The app's OpenAPI schema as stable, indented JSON with a trailing newline."""
    from service.api.app import create_app

    app = create_app(settings or Settings())
    return json.dumps(app.openapi(), indent=2, sort_keys=False, ensure_ascii=False) + "\n"


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
