"""Shared fixtures: apps built with their own Settings, served through a TestClient.

The client is entered as a context manager so that the lifespan runs (pool, cache,
telemetry). One worker per pool keeps the suite light on the two shared cores; the apps
that most tests share live for the whole session, and ``make_client`` builds a fresh one
for a test that needs its own limits.
"""

from __future__ import annotations

import tempfile
from collections.abc import Callable, Iterator
from contextlib import AbstractContextManager, contextmanager
from pathlib import Path
from typing import Any

import pytest
from fastapi.testclient import TestClient

from service.api.app import create_app
from service.config import Settings

# Small limits for the tests that probe them; every other value is the default.
LIMITED = {"max_points": 40, "max_horizon": 24, "max_body_bytes": 4_000}

SettingsFactory = Callable[..., Settings]
ClientFactory = Callable[..., AbstractContextManager[TestClient]]


def _settings(directory: Path, **overrides: Any) -> Settings:
    """Settings that keep every file the app writes under ``directory``."""
    values: dict[str, Any] = {
        "pool_workers": 1,
        "queue_size": 8,
        "cache_dir": directory / "cache",
        "metrics_dir": directory / "metrics",
        "api_keys": "",
        "api_keys_file": None,
    }
    values.update(overrides)
    return Settings(**values)


@pytest.fixture
def make_settings(tmp_path: Path) -> SettingsFactory:
    """Settings for this test, with its own cache and metrics directories."""
    return lambda **overrides: _settings(tmp_path, **overrides)


@pytest.fixture
def make_client(tmp_path: Path) -> ClientFactory:
    """A context manager giving a client of a new app built with these overrides."""

    @contextmanager
    def build(**overrides: Any) -> Iterator[TestClient]:
        app = create_app(_settings(Path(tempfile.mkdtemp(dir=tmp_path)), **overrides))
        with TestClient(app, raise_server_exceptions=False) as client:
            yield client

    return build


@pytest.fixture(scope="session")
def client(tmp_path_factory: pytest.TempPathFactory) -> Iterator[TestClient]:
    """A client of one app with default limits, shared by the session.

    Server exceptions are not re-raised: a test must see the 500 a caller would see.
    """
    app = create_app(_settings(tmp_path_factory.mktemp("default-app")))
    with TestClient(app, raise_server_exceptions=False) as test_client:
        yield test_client


@pytest.fixture(scope="session")
def limited_client(tmp_path_factory: pytest.TempPathFactory) -> Iterator[TestClient]:
    """A client of one app with the small LIMITED limits, shared by the session."""
    app = create_app(_settings(tmp_path_factory.mktemp("limited-app"), **LIMITED))
    with TestClient(app, raise_server_exceptions=False) as test_client:
        yield test_client
