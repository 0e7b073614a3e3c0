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
    """Refuse bodies over the limit with a 413 problem, by header and by counting bytes."""

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
        seen = 0
        started = False

        async def counting_receive() -> Message:
            nonlocal seen
            message = await receive()
            if message["type"] == "http.request":
                seen += len(message.get("body", b""))
                if seen > self.max_bytes:
                    raise _BodyTooLarge
            return message

        async def tracking_send(message: Message) -> None:
            nonlocal started
            if message["type"] == "http.response.start":
                started = True
            await send(message)

        try:
            await self.app(scope, counting_receive, tracking_send)
        except _BodyTooLarge:
            if not started:
                await _too_large(scope, send, self.max_bytes)


class _BodyTooLarge(Exception):
    pass


async def _too_large(scope: Scope, send: Send, limit: int) -> None:
    rid = scope.get("state", {}).get("request_id")
    body: dict[str, Any] = {
        "type": "/problems/body-too-large", "title": "Content Too Large", "status": 413,
        "detail": f"the request body is larger than the limit of {limit} bytes",
        "instance": scope.get("path", ""), "code": "body_too_large",
        "errors": [{"field": "body", "message": f"at most {limit} bytes"}]}
    if rid:
        body["request_id"] = rid
    payload = json.dumps(body).encode()
    headers = [(b"content-type", b"application/problem+json"),
               (b"content-length", str(len(payload)).encode()), (b"connection", b"close")]
    if rid:
        headers.append((b"x-request-id", rid.encode()))
    await send({"type": "http.response.start", "status": 413, "headers": headers})
    await send({"type": "http.response.body", "body": payload})


def _header(scope: Scope, name: bytes) -> str | None:
    for key, value in scope.get("headers", []):
        if key == name:
            return str(value.decode("latin-1"))
    return None
