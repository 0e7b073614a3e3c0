"""The random-walk verdict on the processes of issue 20, simulated with fixed seeds.

Run: python -m tests.benchmarks.random_walk [--replications 300]. For each process and length
it prints the share of series called a random walk (verdict random_walk or
behaves_like_random_walk), the share recognised as a seasonal random walk, the share of each
grade and stationarity verdict, and the number of responses whose sections contradict each
other (``core.diagnostics.story``), beside the target. tests/core/diagnostics/test_story.py runs
the same rows on fewer seeds.
"""

from __future__ import annotations

import argparse
import os
import time
from collections import Counter
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
import pandas as pd
from scipy.signal import lfilter

from service.core.diagnostics import symmetric_test as st
from service.core.diagnostics.random_walk import RandomWalkVerdict
from service.core.diagnostics.report import diagnose
from service.core.diagnostics.story import contradictions

Maker = Callable[[np.random.Generator, int], np.ndarray]


def ar1(rng: np.random.Generator, n: int, phi: float) -> np.ndarray:
    """A stationary AR(1) path with unit shocks, started in its stationary distribution."""
    shocks = rng.standard_normal(n)
    first = shocks[:1] / np.sqrt(1.0 - phi**2)
    rest, _ = lfilter([1.0], [1.0, -phi], shocks[1:], zi=phi * first)
    return np.concatenate([first, rest])


def walk(drift: float) -> Maker:
    """A random walk with unit shocks and the given drift per step."""
    return lambda rng, n: np.cumsum(drift + rng.standard_normal(n))


def trend(slope: float, phi: float = 0.5) -> Maker:
    """A straight line with AR(1) noise around it."""
    return lambda rng, n: slope * np.arange(n) + ar1(rng, n, phi)


def seasonal_walk(m: int) -> Maker:
    """y_t = y_{t-m} + e_t, started from m independent standard normal values."""

    def make(rng: np.random.Generator, n: int) -> np.ndarray:
        shocks = rng.standard_normal((n + m - 1) // m * m + m).reshape(-1, m)
        return np.cumsum(shocks, axis=0).ravel()[:n]

    return make


@dataclass(frozen=True)
class Row:
    """One process at one length, with its target as a share and a direction."""

    process: str
    length: int
    make: Maker
    period: int
    measure: str
    """'walk' (called a random walk) or 'seasonal' (recognised as a seasonal random walk)."""
    target: tuple[str, float] | None


ROWS = (
    Row("trend-stationary (slope 0.2, AR(1) 0.5 noise)", 100, trend(0.2), 1, "walk", ("<=", 0.05)),
    Row("random walk", 100, walk(0.0), 1, "walk", (">=", 0.90)),
    Row("random walk", 500, walk(0.0), 1, "walk", (">=", 0.95)),
    Row("random walk with drift 0.2", 100, walk(0.2), 1, "walk", (">=", 0.90)),
    Row("random walk with drift 0.2", 500, walk(0.2), 1, "walk", (">=", 0.95)),
    Row("AR(1) 0.5", 100, lambda rng, n: ar1(rng, n, 0.5), 1, "walk", ("<=", 0.05)),
    Row("AR(1) 0.8", 100, lambda rng, n: ar1(rng, n, 0.8), 1, "walk", ("<=", 0.05)),
    Row("AR(1) 0.9", 100, lambda rng, n: ar1(rng, n, 0.9), 1, "walk", None),
    Row("AR(1) 0.95", 100, lambda rng, n: ar1(rng, n, 0.95), 1, "walk", None),
    Row("AR(1) 0.98", 100, lambda rng, n: ar1(rng, n, 0.98), 1, "walk", None),
    Row("seasonal random walk, m = 12", 100, seasonal_walk(12), 12, "seasonal", (">=", 0.90)),
    Row("seasonal random walk, m = 12", 500, seasonal_walk(12), 12, "seasonal", (">=", 0.90)),
)
"""The table of issue 20, in its order; drift, slope and m are our choice (the issue gives none)."""

EXTRA_ROWS = (
    Row(
        "trend-stationary (slope 0.05, AR(1) 0.5 noise)", 100, trend(0.05), 1, "walk", ("<=", 0.05)
    ),
    Row("trend-stationary (slope 0.2, AR(1) 0.5 noise)", 500, trend(0.2), 1, "walk", ("<=", 0.05)),
    Row("random walk", 50, walk(0.0), 1, "walk", None),
    Row("random walk", 200, walk(0.0), 1, "walk", (">=", 0.90)),
    Row("random walk with drift 1", 100, walk(1.0), 1, "walk", (">=", 0.90)),
    Row("random walk, monthly (m = 12)", 150, walk(0.0), 12, "walk", (">=", 0.90)),
    Row("AR(1) 0.8", 300, lambda rng, n: ar1(rng, n, 0.8), 1, "walk", ("<=", 0.05)),
    Row("AR(1) 0.95", 500, lambda rng, n: ar1(rng, n, 0.95), 1, "walk", None),
    Row("seasonal random walk, m = 4", 100, seasonal_walk(4), 4, "seasonal", (">=", 0.90)),
)
"""Other lengths and processes, so that no rule is tuned to the issue's rows alone."""


@dataclass(frozen=True)
class Outcome:
    """Shares over the replications of one row."""

    share: float
    grades: Counter[str]
    verdicts: Counter[str]
    contradictions: int
    replications: int

    def meets(self, target: tuple[str, float] | None) -> str:
        """'yes', 'NO' or '' (no target)."""
        if target is None:
            return ""
        direction, value = target
        ok = self.share >= value if direction == ">=" else self.share <= value
        return "yes" if ok else "NO"


def run_row(row: Row, replications: int, seed: int = 0) -> Outcome:
    """Diagnose ``replications`` seeded series of the row; seeds are (seed, row length, i)."""
    grades: Counter[str] = Counter()
    verdicts: Counter[str] = Counter()
    hits = conflicts = 0
    index = pd.date_range("2000-01-01", periods=row.length, freq="MS")
    for i in range(replications):
        rng = np.random.default_rng([seed, row.length, row.period, i])
        report = diagnose(pd.Series(row.make(rng, row.length), index=index), row.period)
        verdict = report.random_walk
        grade = verdict.grade if isinstance(verdict, RandomWalkVerdict) else "not_applicable"
        grades[grade] += 1
        verdicts[getattr(report.stationarity, "verdict", "not_applicable")] += 1
        hit = isinstance(verdict, RandomWalkVerdict) and (
            verdict.is_random_walk if row.measure == "walk" else verdict.is_seasonal_random_walk
        )
        hits += bool(hit)
        conflicts += bool(contradictions(report))
    return Outcome(hits / replications, grades, verdicts, conflicts, replications)


def compare_tests(n: int = 100, replications: int = 20_000, seed: int = 1) -> None:
    """Power at 5 % against stationary AR(1) series: the weighted symmetric coefficient test
    against the Dickey-Fuller coefficient and t tests (constant, no lags), each at its own
    simulated 5 % critical value on the same random walks."""
    rng = np.random.default_rng(seed)
    walks = np.cumsum(rng.standard_normal((replications, n)), axis=1)

    def dickey_fuller(y: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        x = y[:, :-1] - y[:, :-1].mean(axis=1, keepdims=True)
        d = np.diff(y, axis=1)
        d = d - d.mean(axis=1, keepdims=True)
        xx = np.einsum("ij,ij->i", x, x)
        gamma = np.einsum("ij,ij->i", x, d) / xx
        residual = d - gamma[:, None] * x
        scale = np.einsum("ij,ij->i", residual, residual) / (d.shape[1] - 2)
        return d.shape[1] * gamma, gamma / np.sqrt(scale / xx)

    tests: dict[str, Callable[[np.ndarray], np.ndarray]] = {
        "weighted symmetric n(rho - 1)": lambda y: st.row_statistics(y, "c")[0],
        "Dickey-Fuller n(rho - 1)": lambda y: dickey_fuller(y)[0],
        "Dickey-Fuller t": lambda y: dickey_fuller(y)[1],
    }
    print(f"\npower at 5 % (simulated critical values), n = {n}, {replications} series each")
    print(f"{'test':32} " + " ".join(f"{'AR ' + str(phi):>8}" for phi in (0.8, 0.9, 0.95)))
    for name, statistic in tests.items():
        critical = np.quantile(statistic(walks), 0.05)
        shares = []
        for phi in (0.8, 0.9, 0.95):
            paths = np.array([ar1(rng, n, phi) for _ in range(replications // 5)])
            shares.append(float(np.mean(statistic(paths) < critical)))
        print(f"{name:32} " + " ".join(f"{s:>8.3f}" for s in shares))


def main() -> None:
    """Print the table."""
    parser = argparse.ArgumentParser(description=__doc__)
    parser.add_argument("--replications", type=int, default=300)
    parser.add_argument("--seed", type=int, default=0)
    parser.add_argument("--extra", action="store_true", help="also the rows beyond the issue's")
    parser.add_argument("--tests", action="store_true", help="only compare the tests' power")
    args = parser.parse_args()
    if args.tests:
        print(f"cores seen: {os.cpu_count()}, load average {os.getloadavg()[0]:.2f}")
        compare_tests()
        return
    print(f"cores seen: {os.cpu_count()}, load average {os.getloadavg()[0]:.2f}")
    print(f"{args.replications} seeded series per row (seed {args.seed})\n")
    print(f"{'process':48} {'n':>5} {'share':>6} {'target':>8} {'met':>4} {'contra':>6}  grades")
    total = 0
    start = time.perf_counter()
    rows = ROWS + (EXTRA_ROWS if args.extra else ())
    for row in rows:
        out = run_row(row, args.replications, args.seed)
        total += out.contradictions
        target = "" if row.target is None else f"{row.target[0]} {row.target[1]:.2f}"
        what = "" if row.measure == "walk" else " (seasonal)"
        grades = ", ".join(f"{k} {v / out.replications:.2f}" for k, v in out.grades.most_common())
        print(
            f"{row.process + what:48} {row.length:>5} {out.share:>6.3f} {target:>8} "
            f"{out.meets(row.target):>4} {out.contradictions:>6}  {grades}"
        )
    print(
        f"\ncontradictions in total: {total}; {time.perf_counter() - start:.0f} s; "
        f"load average {os.getloadavg()[0]:.2f}"
    )


if __name__ == "__main__":
    main()
