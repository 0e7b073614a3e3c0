"""A `windvane serve` subprocess on a free loopback port, for the tests that need a real server.

Not a test module: imported by tests/test_shutdown.py and tests/test_prometheus_scrape.py
(tests/ is on sys.path). Every wait is bounded and the process is always stopped.
"""

from __future__ import annotations

import os
import re
import shutil
import signal
import socket
import subprocess
import sys
import time
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from dataclasses import dataclass
from pathlib import Path

import httpx

START_SECONDS = 60.0


@dataclass(frozen=True)
class LiveServer:
    """A running server: its process, base URL and log file."""

    process: subprocess.Popen[bytes]
    url: str
    log: Path

    def log_text(self) -> str:
        """The server's combined output so far, for assertion messages."""
        return self.log.read_text(encoding="utf-8", errors="replace")[-4000:]


def process_stats() -> dict[int, list[str]]:
    """Every process's /proc/<pid>/stat fields after the command name (index 1: the parent)."""
    found: dict[int, list[str]] = {}
    for entry in Path("/proc").iterdir():
        if entry.name.isdigit():
            try:
                found[int(entry.name)] = (entry / "stat").read_text().rsplit(")", 1)[1].split()
            except OSError:
                continue
    return found


def descendants(root: int, stats: dict[int, list[str]] | None = None) -> list[int]:
    """``root`` and every process below it, parents before children."""
    parents = {pid: int(fields[1]) for pid, fields in (stats or process_stats()).items()}
    family = [root]
    for pid in family:
        family.extend(p for p, parent in parents.items() if parent == pid)
    return family


def free_port() -> int:
    """A TCP port free on 127.0.0.1 at the time of asking."""
    with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as sock:
        sock.bind(("127.0.0.1", 0))
        return int(sock.getsockname()[1])


def serve_command() -> list[str]:
    """`windvane serve` from this interpreter's environment, or the module if not installed."""
    script = Path(sys.executable).with_name("windvane")
    if script.exists():
        return [str(script), "serve"]
    found = shutil.which("windvane")
    return [found, "serve"] if found else [sys.executable, "-m", "service.cli", "serve"]


def wait_until_healthy(server: LiveServer, seconds: float = START_SECONDS) -> None:
    """Poll /healthz until it answers 200; fail with the server log if it never does."""
    deadline = time.monotonic() + seconds
    while time.monotonic() < deadline:
        if server.process.poll() is not None:
            raise AssertionError(f"server exited early:\n{server.log_text()}")
        try:
            if httpx.get(server.url + "/healthz", timeout=1.0).status_code == 200:
                return
        except httpx.TransportError:
            pass
        time.sleep(0.1)
    raise AssertionError(f"server not healthy after {seconds} s:\n{server.log_text()}")


def stop(server: LiveServer, seconds: float = 30.0) -> int | None:
    """SIGTERM, then SIGKILL if it does not exit in time; the exit code (None if killed)."""
    if server.process.poll() is None:
        server.process.send_signal(signal.SIGTERM)
        try:
            return server.process.wait(timeout=seconds)
        except subprocess.TimeoutExpired:
            # Its own session (start_new_session): the group is the server and its pool.
            os.killpg(server.process.pid, signal.SIGKILL)
            server.process.wait(timeout=10)
            return None
    return server.process.returncode


def gauge(server: LiveServer, name: str) -> float:
    """The current value of an unlabelled gauge on the server's /metrics (0 when absent)."""
    text = httpx.get(server.url + "/metrics", timeout=5).text
    found = re.search(rf"^{name}(?:\{{[^}}]*\}})? ([0-9.e+-]+)$", text, re.M)
    return float(found.group(1)) if found else 0.0


def wait_until(condition: Callable[[], bool], what: str, seconds: float = 30.0) -> None:
    """Poll ``condition`` every 20 ms; fail naming ``what`` if it never holds."""
    deadline = time.monotonic() + seconds
    while time.monotonic() < deadline:
        if condition():
            return
        time.sleep(0.02)
    raise AssertionError(f"{what} never happened within {seconds:g} s")


@contextmanager
def running(directory: Path, **settings: str) -> Iterator[LiveServer]:
    """A healthy server whose files live under ``directory``; WINDVANE_* settings as keywords."""
    port = free_port()
    env = {k: v for k, v in os.environ.items() if not k.startswith("WINDVANE_")}
    env.pop("PROMETHEUS_MULTIPROC_DIR", None)
    env.update(
        {
            "WINDVANE_HOST": "127.0.0.1",
            "WINDVANE_PORT": str(port),
            "WINDVANE_WORKERS": "1",
            "WINDVANE_POOL_WORKERS": "1",
            "WINDVANE_CACHE_DIR": str(directory / "cache"),
            "WINDVANE_METRICS_DIR": str(directory / "metrics"),
            "WINDVANE_LOG_LEVEL": "warning",
        }
    )
    env.update({f"WINDVANE_{k.upper()}": v for k, v in settings.items()})
    log = directory / "server.log"
    with log.open("wb") as sink:
        process = subprocess.Popen(
            serve_command(),
            env=env,
            cwd=directory,
            stdout=sink,
            stderr=subprocess.STDOUT,
            start_new_session=True,
        )
    server = LiveServer(process, f"http://127.0.0.1:{port}", log)
    try:
        wait_until_healthy(server)
        # /healthz answers from the first second; any other path waits until the
        # application is built (the pool may still be warming up).
        httpx.get(server.url + "/metrics", timeout=START_SECONDS).raise_for_status()
        yield server
    finally:
        stop(server)
