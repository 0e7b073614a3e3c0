"""Prometheus metrics, recorded in the server process around pool calls.

Each app builds its own ``Telemetry`` (a ``CollectorRegistry`` per app, nothing at import
time). With several server processes, client_python's multiprocess mode is used as its
guide says: ``PROMETHEUS_MULTIPROC_DIR`` is set before the processes start, /metrics reads
every process's files through a ``MultiProcessCollector``, and an exiting process is marked
dead so its live gauges drop out.
"""

from __future__ import annotations

import os
import re
from pathlib import Path

from prometheus_client import (
    CONTENT_TYPE_LATEST,
    CollectorRegistry,
    Counter,
    Gauge,
    Histogram,
    generate_latest,
    multiprocess,
)

from service.runtime.keys import runtime_versions

MULTIPROCESS_ENV = "PROMETHEUS_MULTIPROC_DIR"
# The names client_python gives its per-process files: counter_12.db, gauge_livesum_12.db.
_METRIC_FILE = re.compile(r"^(counter|gauge_[a-z]+|histogram|summary)_\d+\.db$")

# Requests range from a cache hit (~1 ms) to a seasonal search (tens of seconds).
DURATION_BUCKETS = (
    0.001,
    0.0025,
    0.005,
    0.01,
    0.025,
    0.05,
    0.1,
    0.25,
    0.5,
    1.0,
    2.5,
    5.0,
    10.0,
    25.0,
    60.0,
)
LENGTH_BUCKETS = (10, 25, 50, 100, 250, 500, 1_000, 2_500, 5_000, 10_000, 25_000, 100_000)

# Bounded label values: anything else a caller passes is folded into "other".
CACHE_LEVELS = ("response", "fitted")
CACHE_RESULTS = ("hit", "miss", "error")


def multiprocess_directory() -> Path | None:
    """The multiprocess directory when client_python's multiprocess mode is on."""
    value = os.environ.get(MULTIPROCESS_ENV)
    return Path(value) if value else None


class MetricsDirectoryError(RuntimeError):
    """WINDVANE_METRICS_DIR holds something other than metric files; it is left untouched."""


def is_metric_file(path: Path) -> bool:
    """A file client_python's multiprocess mode writes (``counter_<pid>.db``, ...)."""
    return path.is_file() and not path.is_symlink() and _METRIC_FILE.match(path.name) is not None


def prepare_multiprocess(directory: Path) -> None:
    """Empty ``directory`` of old metric files and point client_python at it; call before
    the server workers start. A directory holding anything else is refused, never emptied
    (a mistaken setting such as the home directory must not lose files)."""
    if directory.is_symlink() or (directory.exists() and not directory.is_dir()):
        raise MetricsDirectoryError(f"WINDVANE_METRICS_DIR {str(directory)!r} is not a directory")
    if directory.exists():
        others = [p for p in directory.iterdir() if not is_metric_file(p)]
        if others:
            raise MetricsDirectoryError(
                f"WINDVANE_METRICS_DIR {str(directory)!r} holds {len(others)} entries that are "
                f"not metric files (such as {others[0].name!r}); refusing to empty it: give "
                "an empty directory of its own"
            )
        for path in directory.iterdir():
            path.unlink()
    directory.mkdir(mode=0o700, parents=True, exist_ok=True)
    os.environ[MULTIPROCESS_ENV] = str(directory)


class Telemetry:
    """The service's metrics on one registry, with small methods for each thing recorded."""

    def __init__(self, library_versions: bool = True) -> None:
        self.registry = CollectorRegistry(auto_describe=True)
        self.multiprocess = multiprocess_directory() is not None
        r = self.registry
        self.requests = Counter(
            "windvane_requests",
            "HTTP requests by route template, method and status code.",
            ["route", "method", "status"],
            registry=r,
        )
        self.request_duration = Histogram(
            "windvane_request_duration_seconds",
            "Time from request received to response sent, by route template and method.",
            ["route", "method"],
            buckets=DURATION_BUCKETS,
            registry=r,
        )
        self.fit_duration = Histogram(
            "windvane_fit_duration_seconds",
            "Wall time of work done in the pool (fit, selection, backtest), by family.",
            ["family"],
            buckets=DURATION_BUCKETS,
            registry=r,
        )
        self.fit_failures = Counter(
            "windvane_fit_failures",
            "Fits that did not produce a model, by family and reason.",
            ["family", "reason"],
            registry=r,
        )
        self.cache_lookups = Counter(
            "windvane_cache_lookups",
            "Cache reads by level (response, fitted) and result (hit, miss, error).",
            ["level", "result"],
            registry=r,
        )
        self.selected_family = Counter(
            "windvane_selected_family",
            "Models chosen by automatic selection, by family.",
            ["family"],
            registry=r,
        )
        self.series_length = Histogram(
            "windvane_series_length",
            "Observations per posted series.",
            buckets=LENGTH_BUCKETS,
            registry=r,
        )
        self.pool_queue_depth = Gauge(
            "windvane_pool_queue_depth",
            "Jobs admitted and waiting for a pool worker.",
            registry=r,
            multiprocess_mode="livesum",
        )
        self.pool_busy_workers = Gauge(
            "windvane_pool_busy_workers",
            "Pool workers running a job.",
            registry=r,
            multiprocess_mode="livesum",
        )
        self.pool_workers = Gauge(
            "windvane_pool_workers",
            "Pool worker processes configured.",
            registry=r,
            multiprocess_mode="livesum",
        )
        self.pool_recycled = Counter(
            "windvane_pool_recycled_workers",
            "Pool workers killed and replaced, by reason (budget, crash, retired).",
            ["reason"],
            registry=r,
        )
        versions = runtime_versions()
        if not library_versions:
            # A hardened deployment names only its own version (WINDVANE_LIBRARY_VERSIONS).
            versions = {"windvane": versions["windvane"]}
        # A gauge of value 1 rather than an Info metric: Info has no multiprocess mode.
        build = Gauge(
            "windvane_build_info",
            "Service version and, unless hidden by the settings, the Python and "
            "numerical-library versions; the value is always 1.",
            list(versions),
            registry=r,
            multiprocess_mode="livemax",
        )
        build.labels(**versions).set(1)
        for level in CACHE_LEVELS:
            for result in CACHE_RESULTS:
                self.cache_lookups.labels(level, result)

    # --- recording -----------------------------------------------------------------
    def record_request(self, route: str, method: str, status: int, seconds: float) -> None:
        """One finished HTTP request; ``route`` must be a template, never a raw path."""
        self.requests.labels(route, method, str(status)).inc()
        self.request_duration.labels(route, method).observe(seconds)

    def record_cache(self, level: str, result: str) -> None:
        """One cache read at ``level`` (response | fitted) with ``result`` (hit | miss | error)."""
        level = level if level in CACHE_LEVELS else "other"
        result = result if result in CACHE_RESULTS else "error"
        self.cache_lookups.labels(level, result).inc()

    def record_fit(self, family: str, seconds: float) -> None:
        """The wall time of one pool job for ``family`` (or ``auto`` for a selection)."""
        self.fit_duration.labels(family).observe(seconds)

    def record_fit_failure(self, family: str, reason: str) -> None:
        """A fit that failed; ``reason`` is a short code (budget, crash, unfittable, ...)."""
        self.fit_failures.labels(family, reason).inc()

    def record_selection(self, family: str) -> None:
        """The family chosen by an automatic selection."""
        self.selected_family.labels(family).inc()

    def record_series_length(self, observations: int) -> None:
        """The length of one posted series."""
        self.series_length.observe(observations)

    def record_pool(self, workers: int, busy: int, queued: int) -> None:
        """The pool's current occupancy (called by the pool on every change)."""
        self.pool_workers.set(workers)
        self.pool_busy_workers.set(busy)
        self.pool_queue_depth.set(queued)

    def record_recycle(self, reason: str) -> None:
        """A pool worker killed and replaced."""
        self.pool_recycled.labels(reason).inc()

    # --- exposition ----------------------------------------------------------------
    def exposition(self) -> bytes:
        """The text exposition for /metrics: this process, or every process in multiprocess mode."""
        if not self.multiprocess:
            return generate_latest(self.registry)
        combined = CollectorRegistry()
        multiprocess.MultiProcessCollector(combined)
        return generate_latest(combined)

    content_type = CONTENT_TYPE_LATEST

    def close(self) -> None:
        """Mark this process dead in multiprocess mode, so its live gauges stop counting."""
        if self.multiprocess:
            multiprocess.mark_process_dead(os.getpid())
