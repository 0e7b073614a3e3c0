"""A job that raises in a worker reaches the server log with the worker's own frames."""

from __future__ import annotations

import asyncio
import logging
import traceback
from pathlib import Path

import pool_jobs  # tests/runtime is on sys.path; the workers inherit it
import pytest
from fastapi import Request
from fastapi.testclient import TestClient

from service.api.app import create_app
from service.runtime.pool import WorkerTraceback, WorkPool
from tests.conftest import app_settings


def test_the_exception_is_chained_to_the_worker_traceback() -> None:
    pool = WorkPool(1, 1, budget_seconds=20.0)
    try:
        with pytest.raises(ZeroDivisionError) as caught:
            asyncio.run(pool.run(pool_jobs.broken))
    finally:
        pool.close()
    cause = caught.value.__cause__
    assert isinstance(cause, WorkerTraceback)
    assert "_divide_the_stock" in cause.text and "pool_jobs.py" in cause.text
    # The whole chain, as logging prints it, names the worker's frames before the server's.
    printed = "".join(traceback.format_exception(caught.value))
    assert printed.index("_divide_the_stock") < printed.index("ZeroDivisionError: float")


def test_an_internal_error_is_logged_with_the_worker_frames(
    tmp_path: Path, caplog: pytest.LogCaptureFixture
) -> None:
    app = create_app(app_settings(tmp_path))

    async def failing(request: Request) -> float:
        return await request.app.state.pool.run(pool_jobs.broken)  # type: ignore[no-any-return]

    app.add_api_route("/v1/failing", failing, methods=["GET"])
    with caplog.at_level(logging.ERROR, logger="windvane.errors"):
        with TestClient(app, raise_server_exceptions=False) as client:
            answer = client.get("/v1/failing")
    assert answer.status_code == 500
    assert answer.json()["code"] == "internal_error"
    assert "_divide_the_stock" not in answer.text  # never sent to the caller
    [record] = [r for r in caplog.records if r.name == "windvane.errors"]
    assert record.exc_info is not None
    logged = logging.Formatter().formatException(record.exc_info)
    assert "in _divide_the_stock" in logged and "(in the worker process)" in logged
