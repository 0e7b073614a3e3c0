"""Pure ASGI middleware: request ids and the size limits of the request body and headers."""

from __future__ import annotations

import asyncio
import contextlib
import json
import re
import uuid
from typing import Any

from starlette.requests import Request
from starlette.types import ASGIApp, Message, Receive, Scope, Send

from service.api.problems import PROBLEM_MEDIA_TYPE, instance

_SAFE_ID = re.compile(r"^[A-Za-z0-9._:\-]{1,128}$")
_TITLES = {
    413: "Content Too Large",
    431: "Request Header Fields Too Large",
    503: "Service Unavailable",
}


class HttpMiddleware:
    """Pure ASGI middleware that acts on HTTP requests; other scopes pass straight through."""

    def __init__(self, app: ASGIApp) -> None:
        self.app = app

    async def __call__(self, scope: Scope, receive: Receive, send: Send) -> None:
        if scope["type"] != "http":
            await self.app(scope, receive, send)
            return
        await self.handle(scope, receive, send)

    async def handle(self, scope: Scope, receive: Receive, send: Send) -> None:
        """Handle one HTTP request."""
        await self.app(scope, receive, send)


class RequestIdMiddleware(HttpMiddleware):
    """Accept a well-formed X-Request-ID or make one; echo it on the response."""

    async def handle(self, scope: Scope, receive: Receive, send: Send) -> None:
        given = header(scope, b"x-request-id")
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


class BodyLimitMiddleware(HttpMiddleware):
    """Refuse bodies over the limit with a 413 problem, by header and by counting bytes read.

    ``by_path`` gives some paths a limit of their own (batches carry thousands of series)."""

    def __init__(self, app: ASGIApp, max_bytes: int, by_path: dict[str, int] | None = None) -> None:
        super().__init__(app)
        self.max_bytes = max_bytes
        self.by_path = dict(by_path or {})

    async def handle(self, scope: Scope, receive: Receive, send: Send) -> None:
        limit = self.by_path.get(scope.get("path", ""), self.max_bytes)
        declared = header(scope, b"content-length")
        if declared.isdigit() and int(declared) > limit:
            await _too_large(scope, send, limit)
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
            if seen > limit:
                await _too_large(scope, send, limit)
                return
            chunks.append(chunk)
            if not message.get("more_body", False):
                break
        whole: Message = {"type": "http.request", "body": b"".join(chunks), "more_body": False}
        await _until_disconnect(self.app, scope, whole, receive, send)


async def _until_disconnect(
    app: ASGIApp, scope: Scope, whole: Message, receive: Receive, send: Send
) -> None:
    """Run the app on the body read; if the client disconnects first, cancel it.

    Nobody will read that answer: a job still queued for a worker leaves the queue, and one
    already running has its worker replaced rather than finishing for no one.
    """
    gone = asyncio.Event()
    given = False
    listening = True  # false once nobody waits for this app's answer any more

    async def app_receive() -> Message:
        nonlocal given
        if not given:
            given = True
            return whole
        await gone.wait()
        return {"type": "http.disconnect"}

    async def watch() -> None:
        while (await receive())["type"] != "http.disconnect":
            pass
        gone.set()

    async def app_send(message: Message) -> None:
        if listening:
            await send(message)

    task = asyncio.ensure_future(app(scope, app_receive, app_send))
    watcher = asyncio.ensure_future(watch())
    try:
        await asyncio.wait({task, watcher}, return_when=asyncio.FIRST_COMPLETED)
        if not task.done():
            scope.setdefault("state", {})["client_gone"] = True
            listening = False
            task.cancel()
            with contextlib.suppress(asyncio.CancelledError):
                await task
            return
        task.result()
    finally:
        watcher.cancel()
        if not task.done():
            # This coroutine itself was cancelled (the server's grace period is over): the
            # app may still be unwinding (a worker killed at the same moment); whatever it
            # sends or raises from now on goes nowhere.
            listening = False
            task.cancel()
            task.add_done_callback(_retrieve)


def _retrieve(task: asyncio.Future[None]) -> None:
    if not task.cancelled():
        task.exception()


class CancelledAnswerMiddleware(HttpMiddleware):
    """Answer a request the server cancels (its shutdown grace period is over) with a 503
    ``shutting_down`` problem instead of the server's plain-text 500."""

    async def handle(self, scope: Scope, receive: Receive, send: Send) -> None:
        started = False

        async def watched_send(message: Message) -> None:
            nonlocal started
            started = started or message["type"] == "http.response.start"
            await send(message)

        try:
            await self.app(scope, receive, watched_send)
        except asyncio.CancelledError:
            if started or scope.get("state", {}).get("client_gone"):
                raise
            # The task ends here either way; it ends with an answer the caller can act on.
            await refuse(
                scope,
                send,
                503,
                "shutting_down",
                "the server is shutting down and stopped this request at the end of its "
                "grace period; retry on another instance",
                {"field": "body", "message": "not answered; retry"},
                headers=[(b"retry-after", b"1")],
            )


class AdmissionMiddleware(HttpMiddleware):
    """A 503 before the body is read, parsed or hashed when the pool cannot take more work.

    The check is one comparison (jobs admitted against workers plus queue); the refused
    caller is told to retry after the queue's measured drain time.
    """

    async def handle(self, scope: Scope, receive: Receive, send: Send) -> None:
        if scope.get("method") == "POST":
            pool = getattr(scope["app"].state, "pool", None)
            if pool is not None and pool.full():
                retry = pool.retry_after()
                await refuse(
                    scope,
                    send,
                    503,
                    "overloaded",
                    "all workers are busy and the queue is full",
                    {"field": "body", "message": f"not read; retry after {retry} s"},
                    headers=[(b"retry-after", str(retry).encode())],
                )
                return
        await self.app(scope, receive, send)


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
    scope: Scope,
    send: Send,
    status: int,
    code: str,
    detail: str,
    error: dict[str, str],
    headers: list[tuple[bytes, bytes]] | None = None,
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
        (b"content-type", PROBLEM_MEDIA_TYPE.encode()),
        (b"content-length", str(len(payload)).encode()),
        (b"connection", b"close"),
        *(headers or []),
    ]
    # No x-request-id header here: RequestIdMiddleware, outside this one, adds it.
    await send({"type": "http.response.start", "status": status, "headers": headers})
    await send({"type": "http.response.body", "body": payload})


class HeaderLimitMiddleware(HttpMiddleware):
    """Refuse a request line plus headers over the limit with a 431 problem.

    The HTTP server has already read them; the cap keeps a request with megabytes of headers
    from reaching the app's parsing, logging and key checks.
    """

    def __init__(self, app: ASGIApp, max_bytes: int) -> None:
        super().__init__(app)
        self.max_bytes = max_bytes

    async def handle(self, scope: Scope, receive: Receive, send: Send) -> None:
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


def header(scope: Scope, name: bytes) -> str:
    """The first value of the request header ``name`` (lower case), "" when absent."""
    for key, value in scope.get("headers", []):
        if key == name:
            return bytes(value).decode("latin-1")
    return ""
