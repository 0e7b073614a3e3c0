"""Shared fixtures: apps built with their own Settings, served through a TestClient.

The client is entered as a context manager so that the lifespan runs (pool, cache,
telemetry). One worker per pool keeps the suite light on the two shared cores; the apps
that most tests share live for the whole session, and ``make_client`` builds a fresh one
for a test that needs its own limits.
"""

from __future__ import annotations

import tempfile
from collections.abc import Callable, Iterator
from contextlib import AbstractContextManager, ExitStack, contextmanager
from pathlib import Path
from typing import Any

import pytest
from fastapi.testclient import TestClient

from service.api.app import create_app
from service.config import Settings

SettingsFactory = Callable[..., Settings]


def pytest_configure(config: pytest.Config) -> None:
    """One BLAS thread, as in the pool's workers: statsmodels' many tiny linear-algebra calls
    ran 5-20 times slower multi-threaded on these two shared cores."""
    from service.runtime.workers import pin_threads

    pin_threads()


ClientFactory = Callable[..., AbstractContextManager[TestClient]]
SharedClients = Callable[..., TestClient]


def app_settings(directory: Path, **overrides: Any) -> Settings:
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
    return lambda **overrides: app_settings(tmp_path, **overrides)


@pytest.fixture
def make_client(tmp_path: Path) -> ClientFactory:
    """A context manager giving a client of a new app built with these overrides."""

    @contextmanager
    def build(**overrides: Any) -> Iterator[TestClient]:
        app = create_app(app_settings(Path(tempfile.mkdtemp(dir=tmp_path)), **overrides))
        with TestClient(app, raise_server_exceptions=False) as client:
            yield client

    return build


@pytest.fixture(scope="session")
def shared_client(tmp_path_factory: pytest.TempPathFactory) -> Iterator[SharedClients]:
    """Clients kept open for the session, one per set of overrides, built on first use.

    Server exceptions are not re-raised: a test must see the 500 a caller would see.
    """
    opened: dict[tuple[tuple[str, Any], ...], TestClient] = {}
    with ExitStack() as stack:

        def get(**overrides: Any) -> TestClient:
            key = tuple(sorted(overrides.items()))
            if key not in opened:
                app = create_app(app_settings(tmp_path_factory.mktemp("app"), **overrides))
                opened[key] = stack.enter_context(TestClient(app, raise_server_exceptions=False))
            return opened[key]

        yield get


@pytest.fixture(scope="session")
def client(shared_client: SharedClients) -> TestClient:
    """A client of the app with default limits, shared by the session."""
    return shared_client()
