"""Typed dependencies that hand the app's runtime objects to routes."""

from __future__ import annotations

from typing import Annotated

from fastapi import Depends, Request

from service.config import Settings
from service.runtime.cache import Cache
from service.runtime.pool import WorkPool
from service.runtime.telemetry import Telemetry


def get_settings(request: Request) -> Settings:
    """The settings the app was built with."""
    settings: Settings = request.app.state.settings
    return settings


def get_pool(request: Request) -> WorkPool:
    """The process pool built in the lifespan."""
    pool: WorkPool = request.app.state.pool
    return pool


def get_cache(request: Request) -> Cache:
    """The response and fitted-model cache built in the lifespan."""
    cache: Cache = request.app.state.cache
    return cache


def get_telemetry(request: Request) -> Telemetry:
    """The app's metrics, built with the app."""
    telemetry: Telemetry = request.app.state.telemetry
    return telemetry


SettingsDep = Annotated[Settings, Depends(get_settings)]
PoolDep = Annotated[WorkPool, Depends(get_pool)]
CacheDep = Annotated[Cache, Depends(get_cache)]
TelemetryDep = Annotated[Telemetry, Depends(get_telemetry)]
