"""All settings in one object, read from the environment with the prefix WINDVANE_."""

from __future__ import annotations

from pathlib import Path
from typing import Literal

from pydantic import Field, SecretStr, field_validator
from pydantic_settings import BaseSettings, SettingsConfigDict


class Settings(BaseSettings):
    """Service settings; every field is the environment variable WINDVANE_<NAME>."""

    model_config = SettingsConfigDict(env_prefix="WINDVANE_", extra="ignore")

    host: str = Field("127.0.0.1", description="Address `windvane serve` binds to.")
    port: int = Field(8000, ge=1, le=65535, description="Port `windvane serve` listens on.")
    workers: int = Field(1, ge=1, le=64, description="HTTP server processes.")
    pool_workers: int = Field(
        2, ge=1, le=64, description="Worker processes per server process for fits."
    )
    queue_size: int = Field(
        16, ge=0, le=10_000, description="Requests that may wait for a worker before 503."
    )
    fit_seconds: float = Field(
        30.0, gt=0, le=3600, description="Time budget of one request's CPU work, seconds."
    )
    max_points: int = Field(
        100_000, ge=10, le=10_000_000, description="Most points accepted in one series."
    )
    max_horizon: int = Field(1_000, ge=1, le=100_000, description="Longest forecast horizon.")
    max_body_bytes: int = Field(
        8_000_000,
        ge=1_000,
        le=1_000_000_000,
        description="Largest request body, bytes (413 beyond).",
    )
    max_batch_series: int = Field(
        10_000, ge=1, le=1_000_000, description="Most series in one batch request."
    )
    max_batch_body_bytes: int = Field(
        64_000_000,
        ge=1_000,
        le=4_000_000_000,
        description="Largest body of POST /v1/forecast-batches, bytes (413 beyond); sized "
        "for `max_batch_series` series of a few hundred points.",
    )
    batch_seconds: float = Field(
        1_800.0,
        gt=0,
        le=86_400,
        description="Time budget of a whole batch, seconds: items not finished by then are "
        "answered `not_run`.",
    )
    cache: Literal["on", "off"] = Field("on", description="`off` disables the result cache.")
    cache_dir: Path = Field(
        Path(".windvane-cache"), description="Directory of the on-disk cache (created 0700)."
    )
    cache_max_bytes: int = Field(
        512_000_000, ge=0, description="Size bound of the on-disk cache, bytes."
    )
    cache_secret: SecretStr | None = Field(
        None,
        description="Secret that authenticates every on-disk cache entry (HMAC-SHA256); set "
        "it when the directory is shared by replicas or kept across restarts. Without it, "
        "fitted models are shared only by the processes of one `windvane serve`.",
    )
    cache_retry_seconds: float = Field(
        30.0,
        ge=0,
        le=86_400,
        description="After a failed disk-cache write, seconds before writes are tried again.",
    )
    cache_memory_items: int = Field(1_024, ge=0, description="Finished responses kept in memory.")
    cache_memory_bytes: int = Field(
        64_000_000, ge=0, description="Size bound of the in-memory response cache, bytes."
    )
    pool_max_jobs: int = Field(
        1_000, ge=0, description="Jobs a pool worker runs before it is replaced (0: never)."
    )
    metrics_dir: Path = Field(
        Path(".windvane-metrics"),
        description="Prometheus multiprocess directory when `workers` > 1 (emptied at start).",
    )
    log_level: Literal["debug", "info", "warning", "error"] = Field(
        "info", description="Log level of the JSON request log."
    )
    shutdown_grace_seconds: float = Field(
        30.0, ge=0, le=3600, description="How long in-flight requests may finish on SIGTERM."
    )
    api_keys: str = Field(
        "",
        description="Accepted API keys as comma-separated SHA-256 hex digests ('sha256:<hex>' "
        "or bare hex); when set (here or in api_keys_file), /v1/* needs `Authorization: Bearer`.",
    )
    api_keys_file: Path | None = Field(
        None, description="File of accepted key digests, one per line ('#' starts a comment)."
    )
    protect_metrics: bool = Field(
        False, description="With API keys on, require a key on /metrics as well."
    )
    root_path: str = Field(
        "",
        max_length=200,
        pattern=r"^(/[A-Za-z0-9._~\-]+)*/?$",
        description="Path prefix a gateway serves Windvane under (ASGI root_path), such as "
        "/forecasting; /docs, the OpenAPI server URL and problem `instance` fields include it.",
    )
    library_versions: bool = Field(
        True,
        description="Name the exact Python and numerical library versions in `provenance` "
        "and in /metrics' build info (turn off in hardened deployments; the cache keys still "
        "include them).",
    )
    max_header_bytes: int = Field(
        16_384,
        ge=1_024,
        le=1_048_576,
        description="Largest request line plus headers, bytes (431 beyond).",
    )

    @field_validator("cache_secret", mode="before")
    @classmethod
    def _unset_when_empty(cls, value: object) -> object:
        """An empty WINDVANE_CACHE_SECRET (compose's `${VAR:-}`) means none, not a blank key."""
        return None if value == "" else value
