"""What each POST endpoint can read and answer: the media types, the Accept negotiation, and
how the OpenAPI document describes the CSV bodies, tables, charts, 406 and 415."""

from __future__ import annotations

from typing import Any

from service.api.csv_bodies import BACKTESTS, DIAGNOSTICS, FORECASTS

JSON = "application/json"
CSV = "text/csv"
SVG = "image/svg+xml"
PNG = "image/png"
NDJSON = "application/x-ndjson"

BATCHES = "/v1/forecast-batches"

# What each POST route can answer, the first being the default.
OFFERS: dict[str, tuple[str, ...]] = {
    FORECASTS: (JSON, CSV, SVG, PNG),
    DIAGNOSTICS: (JSON, CSV, SVG, PNG),
    BACKTESTS: (JSON, CSV),
    BATCHES: (JSON, NDJSON),
}
CSV_BODIES = (FORECASTS, DIAGNOSTICS, BACKTESTS)


def media_type(text: str) -> str:
    """The media type of a Content-Type header, without parameters, in lower case."""
    return text.split(";", 1)[0].strip().lower()


def negotiate(accept: str, offers: tuple[str, ...]) -> str | None:
    """The offer the Accept header prefers (by q, then by specificity); None if it takes none."""
    if not accept.strip():
        return offers[0]
    best: tuple[float, int, int] | None = None
    chosen: str | None = None
    for part in accept.split(","):
        pieces = [p.strip() for p in part.split(";")]
        wanted = pieces[0].lower()
        if not wanted:
            continue
        q = 1.0
        for parameter in pieces[1:]:
            name, _, value = parameter.partition("=")
            if name.strip().lower() == "q":
                try:
                    q = float(value)
                except ValueError:
                    q = 0.0
        if not q > 0:
            continue
        for rank, offer in enumerate(offers):
            specificity = _matches(wanted, offer)
            if specificity < 0:
                continue
            score = (q, specificity, -rank)
            if best is None or score > best:
                best, chosen = score, offer
    return chosen


def _matches(wanted: str, offer: str) -> int:
    """How specifically ``wanted`` names ``offer``: 2 exact, 1 type/*, 0 */*, -1 not at all."""
    if wanted in (offer, "application/problem+json" if offer == JSON else ""):
        return 2
    kind = offer.split("/", 1)[0]
    if wanted == f"{kind}/*":
        return 1
    return 0 if wanted == "*/*" else -1


def describe_representations(document: dict[str, Any]) -> dict[str, Any]:
    """The OpenAPI document with the CSV body, the tables and charts, 406 and 415."""
    problem = {"application/problem+json": {"schema": {"$ref": "#/components/schemas/Problem"}}}
    csv_body = {
        "schema": {"type": "string"},
        "example": "timestamp,value\n2025-01-06,412\n2025-01-13,398\n",
    }
    outputs: dict[str, dict[str, Any]] = {
        CSV: {"schema": {"type": "string"}},
        SVG: {"schema": {"type": "string"}},
        PNG: {"schema": {"type": "string", "format": "binary"}},
    }
    for path, offers in OFFERS.items():
        operation = document.get("paths", {}).get(path, {}).get("post")
        if operation is None:
            continue
        responses = operation.setdefault("responses", {})
        content = responses.get("200", {}).setdefault("content", {})
        for offer in offers:
            if offer in outputs:
                content[offer] = outputs[offer]
        responses["406"] = {
            "description": "No answer in a type the Accept header takes",
            "content": problem,
        }
        responses["415"] = {
            "description": "A body of a type this endpoint does not read",
            "content": problem,
        }
        if path in CSV_BODIES:
            operation["requestBody"].setdefault("content", {})[CSV] = csv_body
            operation["description"] = (
                operation.get("description", "")
                + f"\n\nA `{CSV}` body of `timestamp,value` rows is read as the series; the other"
                " fields come from the query string (`horizon`, `coverage=0.8,0.95`, `model`,"
                " `frequency`, `seasonal_period`, ...; `timestamp_column`, `value_column`,"
                " `header=auto|present|absent`). `Accept` chooses the answer: "
                + ", ".join(f"`{o}`" for o in offers)
                + " (charts take `width` and `height` in pixels)."
            )
    return document
