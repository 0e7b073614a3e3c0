"""The boot app `windvane serve` runs: /healthz and /readyz answer before the real app is
built, other requests wait for it, and the real app's lifespan runs inside."""

from __future__ import annotations

import asyncio
import json
import threading
from typing import Any

import pytest

from service.api import boot


class Recorder:
    """Collects what an ASGI app sends."""

    def __init__(self) -> None:
        self.messages: list[dict[str, Any]] = []

    async def __call__(self, message: dict[str, Any]) -> None:
        self.messages.append(message)

    @property
    def status(self) -> int:
        return int(self.messages[0]["status"])

    @property
    def body(self) -> Any:
        return json.loads(self.messages[1]["body"])


async def receive_nothing() -> dict[str, Any]:
    return {"type": "http.request", "body": b"", "more_body": False}


def http(path: str) -> dict[str, Any]:
    return {"type": "http", "method": "GET", "path": path, "headers": [], "query_string": b""}


def test_health_answers_while_the_app_is_built_and_requests_wait_for_it(
    monkeypatch: pytest.MonkeyPatch,
) -> None:
    release = threading.Event()
    built: list[str] = []

    async def real_app(scope: Any, receive: Any, send: Any) -> None:
        await send({"type": "http.response.start", "status": 200, "headers": []})
        await send({"type": "http.response.body", "body": json.dumps(scope["path"]).encode()})

    class Router:
        @staticmethod
        def lifespan_context(app: Any) -> Any:
            class Lifespan:
                async def __aenter__(self) -> None:
                    built.append("entered")

                async def __aexit__(self, *exc: object) -> None:
                    built.append("exited")

            return Lifespan()

    real_app.router = Router  # type: ignore[attr-defined]

    def slow_build() -> Any:
        release.wait(10)
        return real_app

    monkeypatch.setattr(boot, "_build", slow_build)

    async def scenario() -> None:
        app = boot.create_app()
        lifespan_in: asyncio.Queue[dict[str, Any]] = asyncio.Queue()
        lifespan_out = Recorder()
        await lifespan_in.put({"type": "lifespan.startup"})
        running = asyncio.ensure_future(app({"type": "lifespan"}, lifespan_in.get, lifespan_out))
        while not lifespan_out.messages:
            await asyncio.sleep(0.01)
        assert lifespan_out.messages[0]["type"] == "lifespan.startup.complete"

        health, readiness = Recorder(), Recorder()
        await app(http("/healthz"), receive_nothing, health)
        await app(http("/readyz"), receive_nothing, readiness)
        assert (health.status, health.body) == (200, {"status": "ok"})
        assert readiness.status == 503 and readiness.body["code"] == "not_ready"

        work = Recorder()
        waiting = asyncio.ensure_future(app(http("/v1/models"), receive_nothing, work))
        await asyncio.sleep(0.05)
        assert not work.messages  # held until the real app is there
        release.set()
        await asyncio.wait_for(waiting, 10)
        assert work.body == "/v1/models" and built == ["entered"]

        after = Recorder()
        await app(http("/readyz"), receive_nothing, after)
        assert after.body == "/readyz"  # now answered by the real app

        await lifespan_in.put({"type": "lifespan.shutdown"})
        await asyncio.wait_for(running, 10)
        assert built == ["entered", "exited"]

    asyncio.run(scenario())
