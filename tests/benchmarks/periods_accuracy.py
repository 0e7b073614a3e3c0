"""Accuracy of model "auto" on seeded series with several seasonal periods, against the best
single-period benchmark.

Run: python -m tests.benchmarks.periods_accuracy [--quick]

The open series of tests/benchmarks/accuracy.py hold no hourly or daily data with two cycles
(DATASETS.md), so this panel is synthetic and seeded (tests/multi_period_series.py): hourly
request counts with daily and weekly cycles (six and twelve weeks, a two-day holdout) and
daily call counts with weekly and yearly cycles (three years, a four-week holdout from
January and, unless --quick, from April, July and October too: near the winter peak the
yearly cycle barely moves in four weeks, which favours models without it), three seeds each.
Methods in the same run: auto as POST /v1/forecasts runs it with the series' periods
(diagnostics by MSTL, MSTL and harmonic regression among the candidates); the single-period
benchmarks: seasonal naive at the longest period, ETS by AICc and the SES/Holt/damped
combination on classically adjusted data at the shortest period (accuracy.py's methods), and
auto as before with the shortest period alone. MASE is scaled by the in-sample seasonal naive
at the shortest period. The generating process's own mean (no method: what a perfect model
would forecast) is shown beside them: on Poisson counts no method beats it on average.
Target: auto's mean MASE at least 15 % below the best single-period benchmark; the issue's
daily and hourly rows must beat every benchmark. Figures: tests/benchmarks/RESULTS.md.
"""

from __future__ import annotations

import os
import sys
import time
import warnings
from collections.abc import Callable

import numpy as np
import pandas as pd

from service.core.diagnostics.report import diagnose
from service.core.evaluation.scoring import mase, mase_scale
from service.core.models.base import Forecast
from service.core.models.seasonal_naive import SeasonalNaiveSpec
from service.core.selection.auto import select
from service.runtime.workers import pin_threads
from tests.benchmarks.accuracy import LEVELS, ets, m4_combination
from tests.multi_period_series import daily_calls, daily_rate, hourly_counts, hourly_rate

Case = tuple[str, pd.Series, tuple[float, ...], int]
QUARTER = 91
"""Days between the holdouts of one daily series (January, April, July, October)."""
Method = Callable[[pd.Series, tuple[float, ...], int], Forecast]


def cases(quick: bool = False) -> list[Case]:
    """Name, series (holdout included), periods, holdout length."""
    out: list[Case] = []
    for seed in (1, 2, 3):
        for weeks in (6, 12):
            y = hourly_counts(weeks=weeks, seed=seed, extra=48)
            out.append((f"hourly {weeks}w s{seed}", y, (24.0, 168.0), 48))
        out.append((f"daily 3y s{seed}", daily_calls(3, seed=seed, extra=28), (7.0, 365.25), 28))
    if not quick:
        for seed in (1, 2, 3):
            for month, quarters in (("apr", 1), ("jul", 2), ("oct", 3)):
                y = daily_calls(3, seed=seed, extra=28 + QUARTER * quarters)
                out.append((f"daily 3y s{seed} {month}", y, (7.0, 365.25), 28))
    return out


def generating_mean(y: pd.Series) -> np.ndarray:
    """The mean the seeded counts were drawn around (a reference, not a method)."""
    return hourly_rate(y.index) if y.index.freqstr == "h" else daily_rate(y.index)


def auto_periods(y: pd.Series, periods: tuple[float, ...], h: int) -> Forecast:
    m = round(periods[0])
    report = diagnose(y, m, periods=periods)
    return select(y, m, h, LEVELS, diagnostics=report).forecast


def auto_single(y: pd.Series, periods: tuple[float, ...], h: int) -> Forecast:
    m = round(periods[0])
    return select(y, m, h, LEVELS, diagnostics=diagnose(y, m)).forecast


def naive_longest(y: pd.Series, periods: tuple[float, ...], h: int) -> Forecast:
    return SeasonalNaiveSpec().fit(y, round(periods[-1])).forecast(h, LEVELS)


METHODS: dict[str, Method] = {
    "auto, periods": auto_periods,
    "auto, shortest": auto_single,
    "seasonal naive, longest period": naive_longest,
    "ets (AICc)": lambda y, p, h: ets(y, round(p[0]), h),
    "ses/holt/damped": lambda y, p, h: m4_combination(y, round(p[0]), h),
}
BENCHMARKS = ("seasonal naive, longest period", "ets (AICc)", "ses/holt/damped")


def main(args: list[str]) -> None:
    pin_threads()
    print(f"cores seen: {os.cpu_count()}")
    columns = [*METHODS, GENERATING]
    print(f"{'series':22s} " + " ".join(f"{m[:15]:>15s}" for m in columns) + "  auto s  load")
    scores: dict[str, list[float]] = {m: [] for m in columns}
    names: list[str] = []
    for name, y, periods, h in cases("--quick" in args):
        train, test = y.iloc[:-h], y.to_numpy(dtype=float)[-h:]
        scale = mase_scale(train.to_numpy(dtype=float), round(periods[0]))
        row, seconds = [], 0.0
        for method, run in METHODS.items():
            start = time.perf_counter()
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                fc = run(train, periods, h)
            if method == "auto, periods":
                seconds = time.perf_counter() - start
            scores[method].append(mase(test, fc.point, scale))
            row.append(f"{scores[method][-1]:15.3f}")
        scores[GENERATING].append(mase(test, generating_mean(y)[-h:], scale))
        row.append(f"{scores[GENERATING][-1]:15.3f}")
        names.append(name)
        print(
            f"{name:22s} " + " ".join(row) + f"  {seconds:6.1f}  {os.getloadavg()[0]:.1f}",
            flush=True,
        )
    groups = {
        "all": lambda n: True,
        "hourly": lambda n: n.startswith("hourly"),
        "daily, january": lambda n: n.startswith("daily") and n.count(" ") == 2,
        "daily, four cuts": lambda n: n.startswith("daily"),
    }
    for group, member in groups.items():
        keep = [i for i, n in enumerate(names) if member(n)]
        if not keep or (group == "daily, four cuts" and len(keep) == 3):
            continue
        means = {m: float(np.mean([v[i] for i in keep])) for m, v in scores.items()}
        best = min(BENCHMARKS, key=lambda m: means[m])
        ratio = means["auto, periods"] / means[best]
        print(
            f"{group} ({len(keep)}): "
            + ", ".join(f"{m} {v:.3f}" for m, v in means.items())
            + f"; auto / best benchmark ({best}) {ratio:.3f}"
            + (" (target <= 0.85)" if group == "all" else " (target < 1)")
        )


GENERATING = "generating mean"


if __name__ == "__main__":
    main(sys.argv[1:])
