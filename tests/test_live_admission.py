"""Admission, disconnects and size limits against a real `windvane serve` (uvicorn, httptools).

One pool worker and a queue of one: a slow forecast holds the worker, a second waits. A client
that hangs up while queued must leave the queue at once (status 499 in the metrics, no 5xx);
with the queue full, a new request is refused with a 503 problem before its body is read.
"""

from __future__ import annotations

import json
import re
import socket
import threading
from pathlib import Path
from typing import Any

import httpx
import pytest
from live_server import LiveServer, gauge, running, wait_until
from test_shutdown import slow_body

pytestmark = [pytest.mark.server, pytest.mark.slow]


def raw_post(server: LiveServer, body: bytes) -> socket.socket:
    """A POST sent whole on a socket the caller closes without reading the answer."""
    host, port = server.url.removeprefix("http://").split(":")
    sock = socket.create_connection((host, int(port)), timeout=10)
    head = (
        f"POST /v1/forecasts HTTP/1.1\r\nHost: {host}\r\nContent-Type: application/json\r\n"
        f"Content-Length: {len(body)}\r\n\r\n"
    ).encode()
    sock.sendall(head + body)
    return sock


def test_queue_drops_a_client_that_left_and_a_full_queue_refuses_before_reading(
    tmp_path: Path,
) -> None:
    answers: list[httpx.Response | BaseException] = []
    with running(tmp_path, cache="off", pool_workers="1", queue_size="1") as server:
        wait_until(
            lambda: httpx.get(server.url + "/readyz", timeout=5).status_code == 200,
            "readiness",
            120,
        )

        def post(body: dict[str, Any]) -> None:
            try:
                answers.append(httpx.post(server.url + "/v1/forecasts", json=body, timeout=120))
            except BaseException as exc:  # handed to the test thread below
                answers.append(exc)

        holder = threading.Thread(target=post, args=(slow_body(("add", "mul")),))
        holder.start()
        wait_until(lambda: gauge(server, "windvane_pool_busy_workers") >= 1, "a busy worker")

        # A second client queues behind it, then hangs up: its job must leave the queue.
        leaver = raw_post(server, json.dumps(slow_body(("mul",))).encode())
        wait_until(lambda: gauge(server, "windvane_pool_queue_depth") >= 1, "a queued job")
        leaver.close()
        wait_until(lambda: gauge(server, "windvane_pool_queue_depth") == 0, "an empty queue", 10)
        assert holder.is_alive(), "the slow forecast ended before the check"

        # Fill the queue again, then a request that is not even JSON: refused unread.
        waiter = threading.Thread(target=post, args=(slow_body(("mul",)),))
        waiter.start()
        wait_until(lambda: gauge(server, "windvane_pool_queue_depth") >= 1, "a full queue")
        refused = httpx.post(server.url + "/v1/forecasts", content=b"{not json", timeout=10)
        assert refused.status_code == 503, refused.text
        assert refused.headers["content-type"] == "application/problem+json"
        assert refused.json()["code"] == "overloaded"
        assert int(refused.headers["retry-after"]) >= 1
        assert httpx.get(server.url + "/healthz", timeout=5).status_code == 200

        holder.join(timeout=120)
        waiter.join(timeout=120)
        metrics = httpx.get(server.url + "/metrics", timeout=5).text

    assert [a.status_code for a in answers if isinstance(a, httpx.Response)] == [200, 200], answers
    assert re.search(r'windvane_requests_total\{[^}]*status="499"[^}]*\} 1\.0', metrics), metrics
    assert not re.search(r'windvane_requests_total\{[^}]*status="5(?!03)\d\d"', metrics)
    assert "Traceback" not in server.log_text(), server.log_text()


def test_headers_and_bodies_over_their_limits_are_problems_on_a_real_server(
    tmp_path: Path,
) -> None:
    with running(tmp_path, max_header_bytes="4096", max_body_bytes="2000") as server:
        big_header = httpx.get(server.url + "/healthz", headers={"x-pad": "p" * 8_000}, timeout=10)
        big_body = httpx.post(server.url + "/v1/forecasts", content=b"[" + b"1," * 5_000 + b"1]")
        bad_json = httpx.post(
            server.url + "/v1/forecasts",
            content='{"series": {"name": "été", "values": [1,, 2]}}'.encode(),
            headers={"content-type": "application/json"},
        )
    assert big_header.status_code == 431, big_header.text
    assert big_header.json()["code"] == "headers_too_large"
    assert big_body.status_code == 413 and big_body.json()["code"] == "body_too_large"
    assert bad_json.status_code == 400
    assert bad_json.json()["errors"] == [
        {"field": "body", "message": "Expecting value at byte 42 (line 1, column 41)"}
    ]
