"""Typed dependencies that hand the app's runtime objects to routes."""

from __future__ import annotations

from typing import Annotated

from fastapi import Depends, Request

from service.config import Settings
from service.runtime.pool import WorkPool


def get_settings(request: Request) -> Settings:
    """The settings the app was built with."""
    settings: Settings = request.app.state.settings
    return settings


def get_pool(request: Request) -> WorkPool:
    """The process pool built in the lifespan."""
    pool: WorkPool = request.app.state.pool
    return pool


SettingsDep = Annotated[Settings, Depends(get_settings)]
PoolDep = Annotated[WorkPool, Depends(get_pool)]
