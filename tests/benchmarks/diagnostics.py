"""Speed of diagnose() at 1,000 / 10,000 / 100,000 points, and its ADF against adfuller's;
how often the KPSS differencing search finds d = 1 on random walks with our short bandwidth
trunc(3 √n / 13) and with statsmodels' data-driven one (why the short one was chosen).

Run: python -m tests.benchmarks.diagnostics. Targets: 1,000 points well under 50 ms,
100,000 under 2 s. BLAS threads matter on a shared 2-core machine: compare a run with
OPENBLAS_NUM_THREADS=1 (what pool workers should use) with the default.
"""

from __future__ import annotations

import os
import time
import warnings
from collections.abc import Callable

import numpy as np
import pandas as pd
from statsmodels.tsa.stattools import adfuller

from service.api.diagnostics_body import diagnostics_body
from service.core.diagnostics.report import diagnose
from service.core.diagnostics.stationarity import ADF_LAG_CAP, HypothesisTest, adf_test, kpss_test


def best_of(run: Callable[[], object], repeats: int) -> float:
    """The fastest of ``repeats`` wall-clock timings, in seconds (least disturbed by others)."""
    times = []
    for _ in range(repeats):
        start = time.perf_counter()
        run()
        times.append(time.perf_counter() - start)
    return min(times)


def hourly_walk(n: int, seed: int = 0) -> pd.Series:
    """A random walk with a daily cycle on an hourly index."""
    rng = np.random.default_rng(seed)
    values = np.cumsum(rng.normal(size=n)) + 3 * np.sin(2 * np.pi * np.arange(n) / 24)
    return pd.Series(values, index=pd.date_range("2020-01-01", periods=n, freq="h"))


def main() -> None:
    """Print the tables."""
    threads = os.environ.get("OPENBLAS_NUM_THREADS", "default")
    print(f"cores seen: {os.cpu_count()}, OPENBLAS_NUM_THREADS={threads}")
    print("\ndiagnose(y, 24), hourly random walk with a daily cycle, best of repeats")
    print(f"{'points':>8} {'seconds':>9} {'x 1k':>7} {'target':>8}")
    base = None
    for n, repeats, target in ((1_000, 7, 0.05), (10_000, 3, None), (100_000, 2, 2.0)):
        y = hourly_walk(n)
        seconds = best_of(lambda y=y: diagnostics_body(diagnose(y, 24), []), repeats)
        base = base or seconds
        goal = f"< {target:g}" if target else ""
        print(f"{n:>8} {seconds:>9.4f} {seconds / base:>7.1f} {goal:>8}")
    print("\nADF (constant and trend, AIC lag search) against statsmodels adfuller, same max lag")
    print(f"{'points':>8} {'ours s':>9} {'adfuller s':>11} {'speed-up':>9}")
    for n in (1_000, 10_000):
        x = hourly_walk(n).to_numpy()
        lag = min(ADF_LAG_CAP, int(np.ceil(12 * (n / 100) ** 0.25)))
        ours = best_of(lambda x=x: adf_test(x, "ct"), 5)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            theirs = best_of(
                lambda x=x, lag=lag: adfuller(x, maxlag=lag, regression="ct", result_object=True),
                3,
            )
        print(f"{n:>8} {ours:>9.4f} {theirs:>11.4f} {theirs / ours:>9.1f}")
    kpss_bandwidths()


def successive_kpss(x: np.ndarray, reject: Callable[[np.ndarray], bool], most: int = 2) -> int:
    """d: how many successive differences the KPSS (level) test rejects, at most ``most``."""
    d = 0
    while d < most and reject(x):
        x, d = np.diff(x), d + 1
    return d


def kpss_bandwidths(walks: int = 40, n: int = 200) -> None:
    """d = 1 counts on seeded random walks: the short bandwidth against the data-driven one."""
    from statsmodels.tsa.stattools import kpss

    def ours(x: np.ndarray) -> bool:
        test = kpss_test(x, "c")
        return isinstance(test, HypothesisTest) and test.rejects

    def data_driven(x: np.ndarray) -> bool:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            return bool(kpss(x, "c", nlags="auto")[1] < 0.05)

    found = {"short": 0, "data-driven": 0}
    for seed in range(walks):
        x = np.cumsum(np.random.default_rng(seed).normal(size=n))
        found["short"] += successive_kpss(x, ours) == 1
        found["data-driven"] += successive_kpss(x, data_driven) == 1
    print(f"\nKPSS differencing on {walks} random walks of {n} points: d = 1 found")
    for name, count in found.items():
        print(f"{name:>12} bandwidth: {count} times in {walks}")


if __name__ == "__main__":
    main()
