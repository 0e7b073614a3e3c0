"""Start-up timeline of `windvane serve`: process start -> open port -> /healthz -> /readyz ->
the first requests, and what the HTTP server process has loaded.

Run by hand: ``python -m tests.benchmarks.startup [--rounds N] [--against DIR]``. Each round
starts `windvane serve` (default settings: 2 pool workers) in a fresh directory with this
checkout's code first on PYTHONPATH, times from ``Popen`` to the first accepted connection,
the first /healthz 200 and the first /readyz 200, reads the CPU seconds used to get there
(server, fork server and workers, from /proc), then sends, one at a time, four distinct
explicit ETS forecasts and four distinct automatic ones, with the wall time of each and the
CPU seconds the server and its pool spent on it. With two workers the first two of
each kind land on workers that have not run that kind yet (the pool hands out its idle
workers in turn); the last two are the warm figure. It also reports the server process's
resident memory and whether statsmodels or scipy are mapped in it (/proc/PID/maps).
``--against DIR`` alternates rounds with another checkout (e.g. a worktree of main), so
before and after are measured side by side under the same load. Figures:
tests/benchmarks/RESULTS.md.
"""

from __future__ import annotations

import argparse
import os
import socket
import subprocess
import tempfile
import time
from pathlib import Path
from statistics import median

import httpx

from tests.benchmarks.service import auto_body, body, cpu_seconds, free_port, load_text
from tests.live_server import serve_command

ROOT = Path(__file__).resolve().parents[2]
KINDS = ("explicit", "auto")
REQUESTS = 4


def server_libraries(pid: int) -> tuple[float, str]:
    """Resident MB of the HTTP server process and which of statsmodels/scipy it has mapped."""
    status = Path(f"/proc/{pid}/status").read_text()
    rss = next(int(line.split()[1]) for line in status.splitlines() if line.startswith("VmRSS:"))
    maps = Path(f"/proc/{pid}/maps").read_text()
    loaded = [name for name in ("statsmodels", "scipy") if f"/{name}/" in maps]
    return rss / 1024, ", ".join(loaded) or "neither"


def timed_post(
    client: httpx.Client, base: str, payload: dict[str, object], pid: int
) -> tuple[float, float]:
    """Wall seconds of one request, and the CPU seconds the server and its pool spent on it."""
    cpu = cpu_seconds(pid)
    started = time.perf_counter()
    r = client.post(f"{base}/v1/forecasts", json=payload)
    r.raise_for_status()
    return time.perf_counter() - started, cpu_seconds(pid) - cpu


def one_round(code: Path, salt: float) -> dict[str, object]:
    """One `windvane serve` from nothing with ``code`` first on PYTHONPATH."""
    directory = Path(tempfile.mkdtemp(prefix="windvane-start-"))
    port = free_port()
    env = {
        **os.environ,
        "PYTHONPATH": str(code),
        "WINDVANE_PORT": str(port),
        "WINDVANE_CACHE_DIR": str(directory / "cache"),
        "WINDVANE_LOG_LEVEL": "warning",
    }
    base = f"http://127.0.0.1:{port}"
    out: dict[str, object] = {}
    started = time.perf_counter()
    process = subprocess.Popen(serve_command(), env=env, cwd=directory, stdout=subprocess.DEVNULL)
    try:
        while "ready" not in out and time.perf_counter() - started < 120:
            if "port" not in out:
                with socket.socket() as probe:
                    if probe.connect_ex(("127.0.0.1", port)) == 0:
                        out["port"] = time.perf_counter() - started
            else:
                try:
                    if "healthz" not in out:
                        if httpx.get(f"{base}/healthz", timeout=5).status_code == 200:
                            out["healthz"] = time.perf_counter() - started
                    elif httpx.get(f"{base}/readyz", timeout=5).status_code == 200:
                        out["ready"] = time.perf_counter() - started
                        out["cpu"] = cpu_seconds(process.pid)
                except httpx.HTTPError:
                    pass
            time.sleep(0.01)
        out["rss_ready"], out["libraries_ready"] = server_libraries(process.pid)
        with httpx.Client(timeout=120) as client:
            client.get(f"{base}/healthz").raise_for_status()  # the client's own first call
            payloads = {
                "explicit": [body(salt=salt + i) for i in range(REQUESTS)],
                "auto": [auto_body(salt=salt + i) for i in range(REQUESTS)],
            }
            for kind in KINDS:
                timed = [timed_post(client, base, p, process.pid) for p in payloads[kind]]
                out[kind] = [wall for wall, _ in timed]
                out[f"{kind} cpu"] = [cpu for _, cpu in timed]
        out["rss_after"], out["libraries_after"] = server_libraries(process.pid)
    finally:
        process.terminate()
        process.wait(timeout=30)
    return out


def summary(name: str, rounds: list[dict[str, object]]) -> str:
    """Medians over the rounds of one checkout."""

    def med(key: str) -> float:
        return median(float(r[key]) for r in rounds)  # type: ignore[arg-type]

    def med_at(kind: str, picks: slice) -> str:
        wall = median(median(r[kind][picks]) for r in rounds)  # type: ignore[index]
        cpu = median(median(r[f"{kind} cpu"][picks]) for r in rounds)  # type: ignore[index]
        return f"{wall:.3f} s (CPU {cpu:.3f} s)"

    parts = [
        f"{name}: open port {med('port'):.2f} s, /healthz {med('healthz'):.2f} s, "
        f"/readyz {med('ready'):.2f} s, CPU-s to ready {med('cpu'):.2f}",
    ]
    for kind in KINDS:
        parts.append(
            f"  {kind}: first two (fresh workers) {med_at(kind, slice(0, 2))}, "
            f"last two (warm) {med_at(kind, slice(2, None))}"
        )
    parts.append(
        f"  server process: {med('rss_ready'):.0f} MB at ready "
        f"({rounds[-1]['libraries_ready']} mapped), {med('rss_after'):.0f} MB after the requests "
        f"({rounds[-1]['libraries_after']} mapped)"
    )
    return "\n".join(parts)


def times(found: dict[str, object], kind: str) -> str:
    """One round's wall seconds of each request of a kind, and the CPU seconds."""
    wall = " ".join(f"{t:.3f}" for t in found[kind])  # type: ignore[attr-defined]
    cpu = " ".join(f"{t:.3f}" for t in found[f"{kind} cpu"])  # type: ignore[attr-defined]
    return f"{wall} s (CPU {cpu})"


def run(rounds: int, against: Path | None = None) -> None:
    """``rounds`` rounds of this checkout, alternated with ``against`` when given; medians."""
    codes = {"this checkout": ROOT}
    if against is not None:
        codes[f"--against {against}"] = against.resolve()
    results: dict[str, list[dict[str, object]]] = {name: [] for name in codes}
    print(load_text())
    for i in range(rounds):
        for name, code in codes.items():
            found = one_round(code, salt=100.0 * i + 1.0)
            results[name].append(found)
            print(
                f"round {i + 1} {name}: port {found['port']:.2f} s, ready {found['ready']:.2f} s, "
                f"explicit {times(found, 'explicit')}, auto {times(found, 'auto')}; {load_text()}",
                flush=True,
            )
    for name, found_rounds in results.items():
        print(summary(name, found_rounds))
    print(load_text())


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__)
    parser.add_argument("--rounds", type=int, default=3, help="rounds per checkout")
    parser.add_argument("--against", type=Path, help="another checkout, alternated with this")
    args = parser.parse_args()
    run(args.rounds, args.against)


if __name__ == "__main__":
    main()
