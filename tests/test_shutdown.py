"""Graceful shutdown: on SIGTERM `windvane serve` finishes in-flight work, then exits 0."""

from __future__ import annotations

import signal
import threading
import time
from pathlib import Path

import httpx
import numpy as np
import pytest
from live_server import LiveServer, gauge, running, wait_until

pytestmark = [pytest.mark.server, pytest.mark.slow]


def slow_body(errors: tuple[str, ...]) -> dict[str, object]:
    """A combination of damped seasonal ETS fits on 100 monthly years: seconds of pool work."""
    rng = np.random.default_rng(20240611)
    t = np.arange(1200)
    values = 100 + 0.2 * t + 10 * np.sin(2 * np.pi * t / 12) + rng.normal(0, 2, t.size)
    members = [
        {"family": "ets", "error": e, "trend": "add", "damped": True, "season": s}
        for e in errors
        for s in ("add", "mul")
    ]
    return {
        "series": {"start": "1900-01-01", "frequency": "MS", "values": values.tolist()},
        "horizon": 24,
        "coverage": [0.8, 0.95],
        "model": {"family": "combination", "members": members},
    }


def very_slow_body() -> dict[str, object]:
    """A high seasonal ARIMA on the same 100 years: over 30 s of work even on an idle machine,
    so the grace period always ends first (the ETS combination can finish within it)."""
    body = slow_body(("add",))
    body["model"] = {"family": "arima", "order": [3, 1, 3], "seasonal_order": [2, 1, 2]}
    return body


def wait_for_busy_pool(server: LiveServer, seconds: float = 30.0) -> None:
    wait_until(
        lambda: gauge(server, "windvane_pool_busy_workers") >= 1,
        "the slow forecast reaching the pool",
        seconds,
    )


def test_sigterm_lets_the_in_flight_forecast_finish_and_exits_zero(tmp_path: Path) -> None:
    answers: list[httpx.Response | BaseException] = []

    with running(tmp_path, cache="off", shutdown_grace_seconds="30") as server:

        def post() -> None:
            try:
                answers.append(
                    httpx.post(server.url + "/v1/forecasts", json=slow_body(("mul",)), timeout=60)
                )
            except BaseException as exc:  # handed to the test thread below
                answers.append(exc)

        sender = threading.Thread(target=post)
        sender.start()
        # The gauge proves the request is being worked on, so SIGTERM lands mid-request.
        wait_for_busy_pool(server)
        signalled = time.monotonic()
        server.process.send_signal(signal.SIGTERM)
        # The listening socket closes at once: new connections are refused while draining.
        time.sleep(0.3)
        with pytest.raises(httpx.TransportError):
            httpx.get(server.url + "/healthz", timeout=2)
        sender.join(timeout=60)
        exit_code = server.process.wait(timeout=60)
        drained = time.monotonic() - signalled

    assert len(answers) == 1, server.log_text()
    response = answers[0]
    assert isinstance(response, httpx.Response), f"{response!r}\n{server.log_text()}"
    assert response.status_code == 200, response.text
    body = response.json()
    assert len(body["point"]) == 24
    assert [i["coverage"] for i in body["intervals"]] == [0.8, 0.95]
    assert exit_code == 0, server.log_text()
    assert drained < 30, "the drain took the whole grace period"
    assert "Traceback" not in server.log_text(), server.log_text()


def test_a_request_longer_than_the_grace_period_does_not_hold_the_exit(tmp_path: Path) -> None:
    # A 1 s grace period against many seconds of work: the process leaves without waiting for it,
    # and the request it stops gets a shutting_down problem, not the server's plain text.
    outcome: list[object] = []
    with running(tmp_path, cache="off", shutdown_grace_seconds="1") as server:

        def post() -> None:
            try:
                outcome.append(
                    httpx.post(server.url + "/v1/forecasts", json=very_slow_body(), timeout=60)
                )
            except httpx.TransportError as exc:
                outcome.append(exc)

        sender = threading.Thread(target=post)
        sender.start()
        wait_for_busy_pool(server)
        signalled = time.monotonic()
        server.process.send_signal(signal.SIGTERM)
        server.process.wait(timeout=30)
        waited = time.monotonic() - signalled
        sender.join(timeout=30)

    assert waited < 4, f"exit took {waited:.1f} s with a 1 s grace period"
    assert outcome, "the client thread never returned"
    [response] = outcome
    assert isinstance(response, httpx.Response), f"{response!r}\n{server.log_text()}"
    assert response.status_code == 503, response.text
    assert response.headers["content-type"] == "application/problem+json"
    assert response.json()["code"] == "shutting_down"
    assert response.headers["retry-after"] == "1"
    assert "Traceback" not in server.log_text(), server.log_text()
