"""Admission before work: a saturated pool refuses before the body is read, and a client that
disconnects takes its queued job out of the pool's queue."""

from __future__ import annotations

import asyncio
import sys
from collections.abc import Callable
from contextlib import AbstractContextManager
from pathlib import Path
from typing import Any

from fastapi.testclient import TestClient
from starlette.types import Message, Receive, Scope, Send

from service.api.middleware import BodyLimitMiddleware
from service.runtime.pool import WorkPool

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "runtime"))
import pool_jobs  # the workers import it from the same path


def test_a_saturated_pool_refuses_before_reading_the_body(
    make_client: Callable[..., AbstractContextManager[TestClient]],
) -> None:
    with make_client() as client:
        pool = client.app.state.pool
        pool.full = lambda: True
        pool.retry_after = lambda: 7
        # Not even JSON: a 400 would mean the body had been read and parsed.
        refused = client.post(
            "/v1/forecasts", content=b"{not json", headers={"x-request-id": "shed"}
        )
        assert refused.status_code == 503
        assert refused.headers["retry-after"] == "7"
        assert refused.headers["content-type"] == "application/problem+json"
        problem = refused.json()
        assert problem["code"] == "overloaded" and problem["request_id"] == "shed"
        assert problem["errors"][0]["field"] == "body"
        # Liveness, readiness and the catalogue are not fits: they are still answered.
        assert client.get("/healthz").status_code == 200
        assert client.get("/v1/models").status_code == 200
        assert 'status="503"' in client.get("/metrics").text


def _scope() -> Scope:
    return {"type": "http", "method": "POST", "path": "/v1/forecasts", "headers": []}


def test_a_client_that_disconnects_while_queued_leaves_the_queue() -> None:
    pool = WorkPool(1, 4, budget_seconds=30.0)
    seen: dict[str, Any] = {}

    async def app(scope: Scope, receive: Receive, send: Send) -> None:
        await receive()
        try:
            await pool.run(pool_jobs.sleep, 5.0)
        except asyncio.CancelledError:
            seen["cancelled"] = True
            raise

    async def scenario() -> None:
        await pool.run(pool_jobs.add, 0, 0)
        busy = asyncio.ensure_future(pool.run(pool_jobs.sleep, 1.5))
        await asyncio.sleep(0.05)
        messages: list[Message] = [{"type": "http.request", "body": b"{}", "more_body": False}]

        async def receive() -> Message:
            if messages:
                return messages.pop()
            await asyncio.sleep(0.3)  # the client hangs up while its job waits for a worker
            return {"type": "http.disconnect"}

        async def send(message: Message) -> None:
            seen.setdefault("sent", []).append(message)

        scope = _scope()
        await BodyLimitMiddleware(app, max_bytes=1_000)(scope, receive, send)
        seen["busy_done"] = busy.done()
        seen["queued_after"] = pool.stats().queued
        seen["gone"] = scope["state"]["client_gone"]
        await busy

    try:
        asyncio.run(scenario())
    finally:
        pool.close()
    assert seen["cancelled"] and seen["gone"]
    assert "sent" not in seen  # nothing is written to a closed connection
    assert seen["queued_after"] == 0
    assert not seen["busy_done"]  # returned at the disconnect, not after the running job


def test_a_client_that_stays_gets_its_answer() -> None:
    async def app(scope: Scope, receive: Receive, send: Send) -> None:
        assert (await receive())["body"] == b"{}"
        await send({"type": "http.response.start", "status": 200, "headers": []})
        await send({"type": "http.response.body", "body": b"ok"})

    sent: list[Message] = []

    async def scenario() -> None:
        messages: list[Message] = [{"type": "http.request", "body": b"{}", "more_body": False}]
        never = asyncio.Event()

        async def receive() -> Message:
            if messages:
                return messages.pop()
            await never.wait()
            return {"type": "http.disconnect"}

        async def send(message: Message) -> None:
            sent.append(message)

        await BodyLimitMiddleware(app, max_bytes=1_000)(_scope(), receive, send)

    asyncio.run(scenario())
    assert [m["type"] for m in sent] == ["http.response.start", "http.response.body"]
