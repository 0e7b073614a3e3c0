"""`windvane serve` starts a real server on loopback that answers over HTTP.

One server for the module: started as a subprocess on a free port with a bounded wait, and
always stopped in a finally.
"""

from __future__ import annotations

import http.client
import json
import os
import socket
import subprocess
import sys
import time
from collections.abc import Iterator
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import pytest

from service import demo

pytestmark = pytest.mark.server
SCRIPT = Path(sys.executable).parent / "windvane"
HOST = "127.0.0.1"
BODY_LIMIT = 3_000
START_SECONDS = 90.0


@dataclass(frozen=True)
class Server:
    """A running server's address."""

    host: str
    port: int


@dataclass(frozen=True)
class Reply:
    """Status, headers and decoded JSON body of one HTTP exchange."""

    status: int
    headers: dict[str, str]
    body: Any


def free_port() -> int:
    with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as probe:
        probe.bind((HOST, 0))
        return int(probe.getsockname()[1])


def request(
    server: Server,
    method: str,
    path: str,
    body: bytes | None = None,
    headers: dict[str, str] | None = None,
    chunked: bool = False,
) -> Reply:
    connection = http.client.HTTPConnection(server.host, server.port, timeout=30)
    try:
        if chunked and body is not None:
            pieces = [body[i : i + 1000] for i in range(0, len(body), 1000)]
            try:
                connection.request(
                    method, path, body=iter(pieces), headers=headers or {}, encode_chunked=True
                )
            except (BrokenPipeError, ConnectionResetError):
                # The server may answer (413) and close before the last chunk is sent; its
                # answer is already on the socket, as a real client would read it.
                pass
        else:
            connection.request(method, path, body=body, headers=headers or {})
        response = connection.getresponse()
        raw = response.read()
        found = {k.lower(): v for k, v in response.getheaders()}
        return Reply(response.status, found, json.loads(raw) if raw else None)
    finally:
        connection.close()


def wait_until_healthy(process: subprocess.Popen[bytes], server: Server) -> None:
    deadline = time.monotonic() + START_SECONDS
    while time.monotonic() < deadline:
        if process.poll() is not None:
            raise AssertionError(f"windvane serve exited with {process.returncode}")
        try:
            if request(server, "GET", "/healthz").status == 200:
                return
        except OSError:
            pass
        time.sleep(0.25)
    raise AssertionError(f"windvane serve did not answer /healthz within {START_SECONDS} s")


@pytest.fixture(scope="module")
def server(tmp_path_factory: pytest.TempPathFactory) -> Iterator[Server]:
    directory = tmp_path_factory.mktemp("server")
    address = Server(HOST, free_port())
    env = {
        **os.environ,
        "WINDVANE_POOL_WORKERS": "1",
        "WINDVANE_CACHE_DIR": str(directory / "cache"),
        "WINDVANE_METRICS_DIR": str(directory / "metrics"),
        "WINDVANE_MAX_BODY_BYTES": str(BODY_LIMIT),
        "WINDVANE_API_KEYS": "",
        "WINDVANE_LOG_LEVEL": "warning",
    }
    log = (directory / "server.log").open("wb")
    process = subprocess.Popen(
        [str(SCRIPT), "serve", "--host", HOST, "--port", str(address.port)],
        cwd=directory,
        env=env,
        stdout=log,
        stderr=subprocess.STDOUT,
    )
    try:
        wait_until_healthy(process, address)
        yield address
    finally:
        process.terminate()
        try:
            process.wait(timeout=30)
        except subprocess.TimeoutExpired:
            process.kill()
            process.wait(timeout=10)
        log.close()


def test_healthz_answers(server: Server) -> None:
    reply = request(server, "GET", "/healthz")
    assert reply.status == 200
    assert reply.body == {"status": "ok"}
    assert "x-request-id" in reply.headers


def test_a_forecast_over_http(server: Server) -> None:
    body = demo.request_body("energy", horizon=6)
    body["model"] = {"family": "drift"}
    reply = request(
        server,
        "POST",
        "/v1/forecasts",
        json.dumps(body).encode(),
        {"content-type": "application/json"},
    )
    assert reply.status == 200, reply.body
    assert len(reply.body["point"]) == 6
    assert reply.body["timestamps"][0] == "2026-01-01"


def test_a_chunked_body_over_the_limit_is_413(server: Server) -> None:
    body = demo.request_body("requests")  # 672 hourly points, about 5 KB
    data = json.dumps(body).encode()
    assert len(data) > BODY_LIMIT
    reply = request(
        server, "POST", "/v1/forecasts", data, {"content-type": "application/json"}, chunked=True
    )
    assert reply.status == 413
    assert reply.headers["content-type"].startswith("application/problem+json")
    assert reply.body["code"] == "body_too_large"


def test_an_unknown_route_is_a_404_problem(server: Server) -> None:
    reply = request(server, "GET", "/v2/everything")
    assert reply.status == 404
    assert reply.headers["content-type"].startswith("application/problem+json")
