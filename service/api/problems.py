"""RFC 9457 problem documents: one builder, and the mapping of every error path onto it."""

from __future__ import annotations

import logging
from collections.abc import Sequence
from http import HTTPStatus
from typing import Any

from fastapi import FastAPI, Request
from fastapi.exceptions import RequestValidationError
from fastapi.responses import JSONResponse
from starlette.exceptions import HTTPException as StarletteHTTPException

from service.api.schemas.common import Problem
from service.core.errors import WindvaneError
from service.runtime.pool import BudgetExceeded, PoolBusy, PoolClosed, WorkerCrashed

PROBLEM_MEDIA_TYPE = "application/problem+json"
log = logging.getLogger("windvane.errors")
# Problems echo at most this much of any caller-supplied text (a long input never comes back
# in full); a field path is short unless an unknown key is long.
DETAIL_CHARACTERS = 300
FIELD_CHARACTERS = 120


def safe_text(text: object, limit: int) -> str:
    """``text`` as encodable UTF-8 (a lone surrogate becomes '?'), cut to ``limit`` characters."""
    value = str(text)
    if len(value) > limit:
        value = value[: limit - 1] + "…"
    return value.encode("utf-8", "replace").decode("utf-8")


def instance(request: Request) -> str:
    """The path the caller used, with the gateway's prefix (ASGI root_path) in front."""
    root = str(request.scope.get("root_path", "") or "").rstrip("/")
    path = request.url.path
    return path if not root or path.startswith(root + "/") else root + path


# The problem answers every POST endpoint can give, for its OpenAPI `responses`.
PROBLEM_RESPONSES: dict[int | str, dict[str, Any]] = {
    status: {
        "model": Problem,
        "description": description,
        "content": {PROBLEM_MEDIA_TYPE: {}},
    }
    for status, description in (
        (400, "Malformed JSON"),
        (413, "Body larger than the limit"),
        (422, "Invalid series, option or specification"),
        (503, "Busy (Retry-After) or over the time budget"),
    )
}


def problem_response(
    status: int,
    code: str,
    detail: str,
    request: Request | None = None,
    *,
    title: str | None = None,
    errors: Sequence[dict[str, str]] = (),
    headers: dict[str, str] | None = None,
) -> JSONResponse:
    """A problem+json response with type, title, status, detail, instance and errors."""
    body: dict[str, Any] = {
        "type": f"/problems/{code.replace('_', '-')}",
        "title": title or HTTPStatus(status).phrase,
        "status": status,
        "detail": safe_text(detail, DETAIL_CHARACTERS),
        "instance": instance(request) if request is not None else "",
        "code": code,
        "errors": [
            {
                "field": safe_text(e["field"], FIELD_CHARACTERS),
                "message": safe_text(e["message"], DETAIL_CHARACTERS),
            }
            for e in errors
        ],
    }
    if request is not None:
        rid = getattr(request.state, "request_id", None)
        if rid:
            body["request_id"] = rid
    return JSONResponse(body, status_code=status, headers=headers, media_type=PROBLEM_MEDIA_TYPE)


def field_path(loc: Sequence[Any]) -> str:
    """("body", "series", "values", 3) -> "series.values[3]"."""
    parts = list(loc)
    if parts and parts[0] in ("body", "query", "path", "header"):
        parts = parts[1:]
    out = ""
    for p in parts:
        if isinstance(p, int):
            out += f"[{p}]"
        elif str(p).startswith(("function-", "literal[", "dict[", "list[", "tagged-union")) or (
            str(p)[:1].isupper() or p in ("str", "constrained-str")
        ):
            continue  # pydantic's union-branch labels (types, model names) mean nothing to a caller
        else:
            out += f".{p}" if out else str(p)
    return out or "body"


def validation_problem(
    errors: Sequence[Any], body: bytes | None = None, prefix: str = ""
) -> tuple[int, str, str, list[dict[str, str]]]:
    """Status, code, detail and field errors for pydantic's errors (HTTP handler, batch items
    and CLI), fields under ``prefix`` when given.

    A body that is not JSON at all is a 400 ``malformed_json`` naming the byte offset (when
    ``body`` is given); anything else a 422 ``invalid_request`` listing each field once."""
    broken = [e for e in errors if e.get("type") == "json_invalid"]
    if broken:
        where = json_error_place(broken[0], body)
        detail = f"the body is not valid JSON: {where}"
        return 400, "malformed_json", detail, [{"field": "body", "message": where}]
    found = [(field_path(e.get("loc", ())), e) for e in errors]
    seen: dict[str, str] = {}
    for path, e in found:
        if e.get("type") in ("literal_error", "string_type") and any(
            other is not e and _within(p, path) for p, other in found
        ):
            continue  # `"auto" | {...}`: the object branch's error says more than "not a name"
        if prefix:
            path = prefix if path == "body" else f"{prefix}.{path}"
        seen.setdefault(path, _message(e))
    listed = [{"field": f, "message": m} for f, m in seen.items()]
    first = listed[0]
    return 422, "invalid_request", f"{first['field']}: {first['message']}", listed


def json_error_place(error: dict[str, Any], body: bytes | None) -> str:
    """What the JSON parser said and where: the byte offset into the body, line and column."""
    reason = str(error.get("ctx", {}).get("error", "invalid JSON"))
    loc = error.get("loc", ())
    position = loc[1] if len(loc) > 1 and isinstance(loc[1], int) else None
    if position is None or body is None:
        return reason
    # The parser counts characters of the decoded text; a caller's tools count bytes.
    text = body.decode("utf-8", "replace")
    offset = len(text[:position].encode("utf-8", "surrogatepass"))
    line = text.count("\n", 0, position) + 1
    column = position - (text.rfind("\n", 0, position) + 1) + 1
    return f"{reason} at byte {offset} (line {line}, column {column})"


def _within(path: str, parent: str) -> bool:
    """``path`` is ``parent`` or a field inside it."""
    return path == parent or path.startswith((parent + ".", parent + "["))


def _message(error: dict[str, Any]) -> str:
    kind = error.get("type", "")
    if kind == "missing":
        return "this field is required"
    if kind == "extra_forbidden":
        return "unknown field"
    message = str(error.get("msg", "invalid value"))
    return message.removeprefix("Value error, ")


def domain_errors(exc: WindvaneError, prefix: str = "") -> list[dict[str, str]]:
    """The field errors of a domain error, each field under ``prefix`` when given."""
    return [
        {"field": f"{prefix}.{p.field}" if prefix else p.field, "message": p.message}
        for p in exc.problems
    ]


async def _validation(request: Request, exc: Exception) -> JSONResponse:
    assert isinstance(exc, RequestValidationError)
    found = exc.errors()
    # The route has read (and kept) the body before failing to parse it.
    body = await request.body() if any(e.get("type") == "json_invalid" for e in found) else None
    status, code, detail, errors = validation_problem(found, body)
    title = "Malformed JSON" if status == 400 else "Invalid request"
    return problem_response(status, code, detail, request, title=title, errors=errors)


async def _domain(request: Request, exc: Exception) -> JSONResponse:
    assert isinstance(exc, WindvaneError)
    return problem_response(
        422, exc.code, exc.message, request, title=exc.title, errors=domain_errors(exc)
    )


async def _http(request: Request, exc: Exception) -> JSONResponse:
    assert isinstance(exc, StarletteHTTPException)
    codes = {
        400: "malformed_json",
        404: "not_found",
        405: "method_not_allowed",
        413: "body_too_large",
        401: "unauthorized",
        415: "unsupported_media_type",
    }
    detail = exc.detail if isinstance(exc.detail, str) else HTTPStatus(exc.status_code).phrase
    if exc.status_code == 404 and detail == "Not Found":
        detail = f"no route {request.url.path}"
    if exc.status_code == 405 and detail == "Method Not Allowed":
        detail = f"{request.method} is not allowed on {request.url.path}"
    errors: list[dict[str, str]] = []
    if exc.status_code == 400:
        # The body could not be read as JSON at all (nested past the parser's depth, say).
        errors = [{"field": "body", "message": detail}]
    return problem_response(
        exc.status_code,
        codes.get(exc.status_code, "http_error"),
        detail,
        request,
        errors=errors,
        headers=getattr(exc, "headers", None),
    )


async def _busy(request: Request, exc: Exception) -> JSONResponse:
    assert isinstance(exc, PoolBusy)
    return problem_response(
        503,
        "overloaded",
        str(exc),
        request,
        title="Service busy",
        headers={"Retry-After": str(exc.retry_after)},
    )


async def _budget(request: Request, exc: Exception) -> JSONResponse:
    assert isinstance(exc, BudgetExceeded)
    return problem_response(
        503,
        "time_budget_exceeded",
        str(exc),
        request,
        title="Time budget exceeded",
        headers={"Retry-After": "5"},
    )


async def _worker_lost(request: Request, exc: Exception) -> JSONResponse:
    assert isinstance(exc, (WorkerCrashed, PoolClosed))
    code = "worker_crashed" if isinstance(exc, WorkerCrashed) else "shutting_down"
    return problem_response(
        503, code, str(exc), request, title="Worker unavailable", headers={"Retry-After": "1"}
    )


async def _unexpected(request: Request, exc: Exception) -> JSONResponse:
    log.exception("unhandled error on %s %s", request.method, request.url.path)
    return problem_response(
        500, "internal_error", "the server failed to answer; the error was logged", request
    )


def install_problem_handlers(app: FastAPI) -> None:
    """Route every error path of the app through problem_response."""
    app.add_exception_handler(RequestValidationError, _validation)
    app.add_exception_handler(WindvaneError, _domain)
    app.add_exception_handler(StarletteHTTPException, _http)
    app.add_exception_handler(PoolBusy, _busy)
    app.add_exception_handler(BudgetExceeded, _budget)
    app.add_exception_handler(WorkerCrashed, _worker_lost)
    app.add_exception_handler(PoolClosed, _worker_lost)
    app.add_exception_handler(Exception, _unexpected)
