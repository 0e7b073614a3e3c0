"""Pure ASGI middleware: request ids and the request-body size limit."""

from __future__ import annotations

import json
import re
import uuid
from typing import Any

from starlette.types import ASGIApp, Message, Receive, Scope, Send

_SAFE_ID = re.compile(r"^[A-Za-z0-9._:\-]{1,128}$")


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
    rid = scope.get("state", {}).get("request_id")
    body: dict[str, Any] = {
        "type": "/problems/body-too-large",
        "title": "Content Too Large",
        "status": 413,
        "detail": f"the request body is larger than the limit of {limit} bytes",
        "instance": scope.get("path", ""),
        "code": "body_too_large",
        "errors": [{"field": "body", "message": f"at most {limit} bytes"}],
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
    await send({"type": "http.response.start", "status": 413, "headers": headers})
    await send({"type": "http.response.body", "body": payload})


def _header(scope: Scope, name: bytes) -> str | None:
    for key, value in scope.get("headers", []):
        if key == name:
            return str(value.decode("latin-1"))
    return None
