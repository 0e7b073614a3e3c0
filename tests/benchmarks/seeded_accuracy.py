"""Auto against the classical benchmarks on seeded series no selection rule was tuned on.

Run: python -m tests.benchmarks.seeded_accuracy [--set yearly|monthly|all] [--per-kind N]

The accuracy benchmark's open series are the ones auto's rules were chosen on. These series
are drawn afresh from fixed seeds: processes of the benchmarks' own model families (a local
linear trend is ETS(A,A,N)'s, AR(1) noise ARIMA's), where the benchmark that is the true model
is hard to beat, and a few that no classical model matches (a trend that turns, a season
multiplying log-linear growth). Each series is scored on its last h points with the accuracy
benchmark's functions and report: MASE, coverage, MSIS, the geometric-mean ratios, the count
worse than 1.5 x naive; then the same ratios by kind. Every method is computed in the run (no
cache). Dated results go to RESULTS.md.
"""

from __future__ import annotations

import argparse
import os
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
import pandas as pd

from service.runtime.workers import pin_threads
from tests.benchmarks.accuracy import (
    FAILED,
    LEVELS,
    METHODS,
    Rows,
    geomean_ratio,
    report,
    score,
    scored,
    targets,
)
from tests.benchmarks.accuracy_series import Case

YEARLY_HOLDOUT = 6
MONTHLY_HOLDOUT = 12
Maker = Callable[[np.random.Generator, np.ndarray], np.ndarray]


def _ar1(rng: np.random.Generator, n: int, phi: float, sd: float) -> np.ndarray:
    e = np.zeros(n)
    for i in range(1, n):
        e[i] = phi * e[i - 1] + rng.normal(0, sd)
    return e


def _local_linear_trend(rng: np.random.Generator, t: np.ndarray) -> np.ndarray:
    level, slope, out = 100.0, rng.normal(1, 0.5), []
    for _ in t:
        slope += rng.normal(0, 0.3)
        level += slope + rng.normal(0, 2)
        out.append(level)
    return np.array(out)


def _damped_trend(rng: np.random.Generator, t: np.ndarray) -> np.ndarray:
    phi, slope, level, out = rng.uniform(0.8, 0.95), rng.uniform(1, 4), 100.0, []
    for _ in t:
        slope *= phi
        level += slope + rng.normal(0, 1.5)
        out.append(level)
    return np.array(out)


def _ar1_around_a_line(rng: np.random.Generator, t: np.ndarray) -> np.ndarray:
    noise = _ar1(rng, t.size, 0.7, 3)
    return 50 + rng.uniform(-1, 2) * t + noise


def _turning_trend(rng: np.random.Generator, t: np.ndarray) -> np.ndarray:
    turn = int(t.size * rng.uniform(0.5, 0.8))
    path = np.where(t < turn, 1.5 * t, 1.5 * turn - 1.0 * (t - turn))
    return 100 + path + rng.normal(0, 3, t.size)


YEARLY: dict[str, Maker] = {
    "walk with drift": lambda rng, t: 100 + np.cumsum(rng.normal(rng.uniform(-1, 2), 3, t.size)),
    "local linear trend": _local_linear_trend,
    "AR(1) around a line": _ar1_around_a_line,
    "damped trend": _damped_trend,
    "log-normal growth": lambda rng, t: 100 * np.exp(np.cumsum(rng.normal(0.03, 0.05, t.size))),
    "trend that turns": _turning_trend,
}
"""Period 1, 24-60 points before a 6-year holdout."""


def _season(t: np.ndarray) -> np.ndarray:
    return np.sin(2 * np.pi * t / 12) + 0.5 * np.cos(4 * np.pi * t / 12)


MONTHLY: dict[str, Maker] = {
    "season": lambda rng, t: 200 + 20 * _season(t) + rng.normal(0, 6, t.size),
    "season and trend": lambda rng, t: 200 + 0.8 * t + 20 * _season(t) + rng.normal(0, 6, t.size),
    "season on a walk": lambda rng, t: 200 + np.cumsum(rng.normal(0, 4, t.size)) + 15 * _season(t),
    "season times growth": lambda rng, t: (
        100 * np.exp(0.005 * t + 0.15 * _season(t) + rng.normal(0, 0.04, t.size))
    ),
    "season and AR(1)": lambda rng, t: 300 + 25 * _season(t) + _ar1(rng, t.size, 0.6, 5),
}
"""Period 12, 60-180 points before a 12-month holdout."""


@dataclass(frozen=True)
class SeededSet:
    """One frequency's kinds of process, with the seeds, lengths and holdout they are drawn at."""

    name: str
    kinds: dict[str, Maker]
    first_seed: int
    points: tuple[int, int]
    """Fewest and most points before the holdout."""
    holdout: int
    period: int
    start: str
    frequency: str

    def case(self, seed: int) -> tuple[str, Case]:
        """The seed's series and its kind (the kind cycles with the seed)."""
        rng = np.random.default_rng(self.first_seed + seed)
        kind = list(self.kinds)[seed % len(self.kinds)]
        n = int(rng.integers(self.points[0], self.points[1] + 1)) + self.holdout
        values = self.kinds[kind](rng, np.arange(n))
        index = pd.date_range(self.start, periods=n, freq=self.frequency)
        series = pd.Series(values, index=index)
        return kind, Case(f"{self.name}.{seed}", series, self.period, self.holdout)


SETS = {
    "yearly": SeededSet("yearly", YEARLY, 1000, (24, 60), YEARLY_HOLDOUT, 1, "1950-01-01", "YS"),
    "monthly": SeededSet(
        "monthly", MONTHLY, 5000, (60, 180), MONTHLY_HOLDOUT, 12, "2005-01-01", "MS"
    ),
}


def seeded_cases(which: str, per_kind: int) -> list[tuple[str, Case]]:
    """Every seeded case of the set(s): per_kind of each kind, seeds 0, 1, 2, ..."""
    chosen = list(SETS.values()) if which == "all" else [SETS[which]]
    return [s.case(seed) for s in chosen for seed in range(per_kind * len(s.kinds))]


def by_kind(rows: Rows, kinds: dict[str, str]) -> None:
    """Auto's geometric-mean ratios and 1.5 x count per kind of process (``kinds``: case name
    to kind)."""
    print(
        f"\n{'kind':22s} {'n':>3s} {'auto':>6s} {'best':>6s} {'gm/ETS':>7s} {'gm/damped':>9s}"
        f" {'gm/ARIMA':>8s} {'>1.5x':>5s}"
    )
    for kind in dict.fromkeys(kinds.values()):
        part = scored(rows.subset(lambda case, _cut, kind=kind: kinds[case.name] == kind))
        auto = part.mases("auto")
        best = min(float(np.mean(part.mases(m))) for m in METHODS if m != "auto")
        simple = np.fmin(part.mases("naive"), part.mases("seasonal naive"))
        print(
            f"{kind:22s} {auto.size:3d} {np.mean(auto):6.3f} {best:6.3f} "
            f"{geomean_ratio(auto, part.mases('ets (AICc)')):7.3f} "
            f"{geomean_ratio(auto, part.mases('damped ets')):9.3f} "
            f"{geomean_ratio(auto, part.mases('arima (stepwise)')):8.3f} "
            f"{int(np.sum(auto > 1.5 * simple)):5d}"
        )


def coverage_by_method(rows: Rows) -> None:
    """Every method's coverage at each level: auto's calibrated intervals beside the models' own."""
    common = scored(rows)
    print("\ncoverage   " + " ".join(f"{m[:15]:>15s}" for m in METHODS))
    for level in LEVELS:
        cells = [np.mean([s.coverage[level] for s in common.scores[m]]) for m in METHODS]
        print(f"{level:8.0%}   " + " ".join(f"{100 * c:15.1f}" for c in cells))


def main(argv: list[str] | None = None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--set", choices=("yearly", "monthly", "all"), default="all")
    parser.add_argument("--per-kind", type=int, default=30)
    args = parser.parse_args(argv)
    print(f"load average at start: {os.getloadavg()}, cores: {os.cpu_count()}")
    rows, kinds = Rows(), {}
    for kind, case in seeded_cases(args.set, args.per_kind):
        rows.cases.append((case, 0))
        kinds[case.name] = kind
        for name, method in METHODS.items():
            try:
                rows.scores[name].append(score(case, method))
            except Exception as exc:  # reported, not fatal to the run
                print(f"  {case.name}: {name} failed: {type(exc).__name__}: {exc}")
                rows.scores[name].append(FAILED)
    report(rows, f"seeded series ({args.set}, {args.per_kind} of each kind)")
    targets(rows)
    coverage_by_method(rows)
    by_kind(rows, kinds)
    print(f"load average at end: {os.getloadavg()}")


if __name__ == "__main__":
    # One BLAS thread, as in the service's workers.
    pin_threads()
    main()
