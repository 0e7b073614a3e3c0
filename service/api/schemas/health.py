"""GET /healthz and /readyz."""

from __future__ import annotations

from typing import Literal

from pydantic import Field

from service.api.schemas.common import Out


class Liveness(Out):
    """The process answers."""

    status: Literal["ok"]


class PoolDetails(Out):
    """The worker pool's occupancy."""

    workers: int
    alive: int
    busy: int
    queued: int
    recycled: int
    start_method: str


class CacheDetails(Out):
    """The cache: responses in memory, entries on disk, and why the disk fails, if it does."""

    enabled: bool
    responses: int
    disk_entries: int
    disk_bytes: int
    directory: str | None
    degraded: str | None = Field(description="Why the disk level is failing, if it is.")


class ReadyChecks(Out):
    """One word per dependency."""

    pool: Literal["ok", "broken"]
    cache: Literal["ok", "degraded", "off"]


class ReadyDetails(Out):
    """The figures behind the checks."""

    pool: PoolDetails
    cache: CacheDetails


class Readiness(Out):
    """Ready to take traffic: the pool is alive (a degraded cache only slows answers)."""

    status: Literal["ready"]
    checks: ReadyChecks
    details: ReadyDetails
