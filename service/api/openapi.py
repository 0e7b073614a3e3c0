"""The exported OpenAPI document: openapi/openapi.json is this text, committed."""

from __future__ import annotations

import json

from service.api.app import create_app
from service.config import Settings


def schema_text(settings: Settings | None = None) -> str:
    """The app's OpenAPI schema as stable, indented JSON with a trailing newline."""
    app = create_app(settings or Settings())
    return json.dumps(app.openapi(), indent=2, sort_keys=False, ensure_ascii=False) + "\n"
