"""Pure ASGI middleware: request ids and the size limits of the request body and headers."""

from __future__ import annotations

import json
import re
import uuid
from typing import Any

from starlette.requests import Request
from starlette.types import ASGIApp, Message, Receive, Scope, Send

from service.api.problems import instance

_SAFE_ID = re.compile(r"^[A-Za-z0-9._:\-]{1,128}$")
_TITLES = {413: "Content Too Large", 431: "Request Header Fields Too Large"}


class RequestIdMiddleware:
    """Accept a well-formed X-Request-ID or make one; echo it on the response."""

    def __init__(self, app: ASGIApp) -> None:
        self.app = app

    async def __call__(self, scope: Scope, receive: Receive, send: Send) -> None:
        if scope["type"] != "http":
            await self.app(scope, receive, send)
            return
        given = _header(scope, b"x-request-id")
        rid = given if given and _SAFE_ID.match(given) else uuid.uuid4().hex
        scope.setdefault("state", {})["request_id"] = rid

        async def send_with_id(message: Message) -> None:
            if message["type"] == "http.response.start":
                message.setdefault("headers", [])
                message["headers"] = [*message["headers"], (b"x-request-id", rid.encode())]
            await send(message)

        await self.app(scope, receive, send_with_id)


class RootPathMiddleware:
    """Serve under a gateway's path prefix: ASGI ``root_path``, with ``path`` including it.

    The gateway may strip the prefix or pass it on; either way routing sees the same paths,
    and /docs, the OpenAPI ``servers`` entry and problem ``instance`` fields carry the prefix.
    """

    def __init__(self, app: ASGIApp, root_path: str) -> None:
        self.app = app
        self.root_path = root_path.rstrip("/")

    async def __call__(self, scope: Scope, receive: Receive, send: Send) -> None:
        if scope["type"] in ("http", "websocket"):
            scope = dict(scope)
            scope["root_path"] = self.root_path
            path = scope.get("path", "")
            if path != self.root_path and not path.startswith(self.root_path + "/"):
                scope["path"] = self.root_path + path
        await self.app(scope, receive, send)


class BodyLimitMiddleware:
    """Refuse bodies over the limit with a 413 problem, by header and by counting bytes read."""

    def __init__(self, app: ASGIApp, max_bytes: int) -> None:
        self.app = app
        self.max_bytes = max_bytes

    async def __call__(self, scope: Scope, receive: Receive, send: Send) -> None:
        if scope["type"] != "http":
            await self.app(scope, receive, send)
            return
        declared = _header(scope, b"content-length")
        if declared is not None and declared.isdigit() and int(declared) > self.max_bytes:
            await _too_large(scope, send, self.max_bytes)
            return
        # Read the whole body before the app runs: FastAPI turns an error raised while it
        # reads the body into a 400, so a streamed (chunked) body must be counted here.
        chunks: list[bytes] = []
        seen = 0
        while True:
            message = await receive()
            if message["type"] != "http.request":
                return  # the client went away before sending the whole body
            chunk = message.get("body", b"")
            seen += len(chunk)
            if seen > self.max_bytes:
                await _too_large(scope, send, self.max_bytes)
                return
            chunks.append(chunk)
            if not message.get("more_body", False):
                break
        whole: Message = {"type": "http.request", "body": b"".join(chunks), "more_body": False}
        await self.app(scope, replay(whole, receive), send)


def replay(first: Message, receive: Receive) -> Receive:
    """A receive that gives ``first`` again, then the rest of the stream."""
    given = False

    async def again() -> Message:
        nonlocal given
        if given:
            return await receive()
        given = True
        return first

    return again


async def _too_large(scope: Scope, send: Send, limit: int) -> None:
    await refuse(
        scope,
        send,
        413,
        "body_too_large",
        f"the request body is larger than the limit of {limit} bytes",
        {"field": "body", "message": f"at most {limit} bytes"},
    )


async def refuse(
    scope: Scope, send: Send, status: int, code: str, detail: str, error: dict[str, str]
) -> None:
    """Answer a problem+json straight from ASGI and close the connection (body left unread)."""
    rid = scope.get("state", {}).get("request_id")
    body: dict[str, Any] = {
        "type": f"/problems/{code.replace('_', '-')}",
        "title": _TITLES[status],
        "status": status,
        "detail": detail,
        "instance": instance(Request(scope)),
        "code": code,
        "errors": [error],
    }
    if rid:
        body["request_id"] = rid
    payload = json.dumps(body).encode()
    headers = [
        (b"content-type", b"application/problem+json"),
        (b"content-length", str(len(payload)).encode()),
        (b"connection", b"close"),
    ]
    # No x-request-id header here: RequestIdMiddleware, outside this one, adds it.
    await send({"type": "http.response.start", "status": status, "headers": headers})
    await send({"type": "http.response.body", "body": payload})


class HeaderLimitMiddleware:
    """Refuse a request line plus headers over the limit with a 431 problem.

    The HTTP server has already read them; the cap keeps a request with megabytes of headers
    from reaching the app's parsing, logging and key checks.
    """

    def __init__(self, app: ASGIApp, max_bytes: int) -> None:
        self.app = app
        self.max_bytes = max_bytes

    async def __call__(self, scope: Scope, receive: Receive, send: Send) -> None:
        if scope["type"] == "http":
            size = len(scope.get("raw_path") or b"") + len(scope.get("query_string") or b"")
            size += sum(len(k) + len(v) + 4 for k, v in scope.get("headers", []))
            if size > self.max_bytes:
                await refuse(
                    scope,
                    send,
                    431,
                    "headers_too_large",
                    f"the request line and headers are larger than {self.max_bytes} bytes",
                    {"field": "headers", "message": f"at most {self.max_bytes} bytes"},
                )
                return
        await self.app(scope, receive, send)


def _header(scope: Scope, name: bytes) -> str | None:
    for key, value in scope.get("headers", []):
        if key == name:
            return str(value.decode("latin-1"))
    return None
