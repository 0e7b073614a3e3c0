"""Fit + forecast time per family through the core against the same model called directly.

Run: python -m tests.benchmarks.families. A 200-point seeded monthly series, horizon 24,
coverage 80/95 %; median of REPEATS runs on one BLAS thread (as in the pool). The ratio is
core seconds / direct seconds measured in the same run (target <= 1.1).
"""

from __future__ import annotations

import os
import statistics
import time
from collections.abc import Callable
from typing import Any

import numpy as np
import pandas as pd
from statsmodels.tsa.exponential_smoothing.ets import ETSModel
from statsmodels.tsa.forecasting.theta import ThetaModel
from statsmodels.tsa.statespace.sarimax import SARIMAX

from service.core.models import registry
from service.runtime.workers import pin_threads

N, PERIOD, HORIZON, REPEATS = 200, 12, 24, 5
COVERAGE = (0.8, 0.95)


def monthly(seed: int = 42) -> pd.Series:
    rng = np.random.default_rng(seed)
    t = np.arange(N)
    values = 300 + 0.6 * t + 25 * np.sin(2 * np.pi * t / PERIOD) + rng.normal(0, 5, N).cumsum()
    return pd.Series(values, index=pd.date_range("2008-01-01", periods=N, freq="MS"))


def intermittent(seed: int = 43) -> pd.Series:
    rng = np.random.default_rng(seed)
    values = np.where(rng.random(N) < 0.3, rng.integers(1, 15, N), 0).astype(float)
    return pd.Series(values, index=pd.date_range("2008-01-01", periods=N, freq="MS"))


def median_seconds(run: Callable[[], Any]) -> float:
    times = []
    for _ in range(REPEATS):
        start = time.perf_counter()
        run()
        times.append(time.perf_counter() - start)
    return statistics.median(times)


def core(spec: dict[str, Any], y: pd.Series) -> Callable[[], Any]:
    parsed = registry.specification_from_dict(spec)
    return lambda: parsed.fit(y, PERIOD).forecast(HORIZON, COVERAGE)


def sarimax(
    y: pd.Series,
    order: tuple[int, int, int],
    seasonal: tuple[int, int, int, int],
    trend: str | None = None,
) -> Callable[[], Any]:
    def run() -> Any:
        res = SARIMAX(y.to_numpy(), order=order, seasonal_order=seasonal, trend=trend).fit(
            disp=False
        )
        return res.get_forecast(HORIZON).conf_int(alpha=0.05)

    return run


def ets_direct(y: pd.Series, **kw: Any) -> Callable[[], Any]:
    # The same outputs as the core: point forecasts and the 80 % and 95 % intervals.
    def run() -> Any:
        res = ETSModel(pd.Series(y.to_numpy()), **kw).fit(disp=False)
        n = y.size
        prediction = res.get_prediction(start=n, end=n + HORIZON - 1)
        return [prediction.summary_frame(alpha=1 - c) for c in COVERAGE]

    return run


def ets_search_direct(y: pd.Series) -> Callable[[], Any]:
    """The same AICc search done directly: every candidate the core considers, fitted with
    statsmodels' defaults, the lowest AICc forecast with its intervals."""
    from service.core.models.ets.family import EtsSpec, candidates_for

    options = candidates_for(EtsSpec(), y.to_numpy(dtype=float), PERIOD)

    def run() -> Any:
        best = None
        for spec in options:
            seasonal = None if spec.season == "none" else spec.season
            kw = {
                "error": spec.error,
                "trend": None if spec.trend == "none" else spec.trend,
                "damped_trend": bool(spec.damped) and spec.trend != "none",
                "seasonal": seasonal,
                "seasonal_periods": PERIOD if seasonal else None,
            }
            try:
                res = ETSModel(pd.Series(y.to_numpy()), **kw).fit(disp=False)
            except (ValueError, np.linalg.LinAlgError):
                continue
            if best is None or res.aicc < best.aicc:
                best = res
        n = y.size
        prediction = best.get_prediction(start=n, end=n + HORIZON - 1)
        return [prediction.summary_frame(alpha=1 - c) for c in COVERAGE]

    return run


def theta_direct(y: pd.Series) -> Callable[[], Any]:
    return lambda: ThetaModel(y.to_numpy(), period=PERIOD).fit().forecast(HORIZON)


def croston_direct(y: pd.Series) -> Callable[[], Any]:
    # No statsmodels Croston: the baseline is the same recursion and empirical-error
    # intervals written inline, so the ratio is the core's overhead.
    def run() -> Any:
        values, alpha = y.to_numpy(), 0.1
        first = int(np.flatnonzero(values > 0)[0])
        size, interval, last = values[first], first + 1.0, first
        fitted = np.full(values.size, np.nan)
        for t in range(first + 1, values.size):
            fitted[t] = size / interval
            if values[t] > 0:
                size += alpha * (values[t] - size)
                interval += alpha * ((t - last) - interval)
                last = t
        errors = (values - fitted)[first + 1 :]
        point = np.full(HORIZON, size / interval)
        return [
            (point + np.quantile(errors, 0.5 - c / 2), point + np.quantile(errors, 0.5 + c / 2))
            for c in COVERAGE
        ]

    return run


def rows(y: pd.Series, demand: pd.Series) -> list[tuple[str, Callable[[], Any], Callable[[], Any]]]:
    aaa = {"error": "add", "trend": "add", "seasonal": "add", "seasonal_periods": PERIOD}
    winner = registry.specification_from_dict({"family": "ets"}).fit(y, PERIOD)
    c = winner.chosen  # type: ignore[attr-defined]
    auto_kw = {
        "error": c.error,
        "trend": None if c.trend == "none" else c.trend,
        "damped_trend": bool(c.damped),
        "seasonal": None if c.season == "none" else c.season,
        "seasonal_periods": PERIOD if c.season != "none" else None,
    }
    out = [
        ("mean", core({"family": "mean"}, y), sarimax(y, (0, 0, 0), (0, 0, 0, 0), "c")),
        ("naive", core({"family": "naive"}, y), sarimax(y, (0, 1, 0), (0, 0, 0, 0))),
        (
            "seasonal_naive",
            core({"family": "seasonal_naive"}, y),
            sarimax(y, (0, 0, 0), (0, 1, 0, PERIOD)),
        ),
        ("drift", core({"family": "drift"}, y), sarimax(y, (0, 1, 0), (0, 0, 0, 0), "c")),
        (
            "ets A,A,A",
            core(
                {"family": "ets", "error": "add", "trend": "add", "damped": False, "season": "add"},
                y,
            ),
            ets_direct(y, **aaa),
        ),
        (
            f"ets auto -> {winner.describe().label}",
            core({"family": "ets"}, y),
            ets_direct(y, **auto_kw),
        ),
        ("ets auto vs the same search direct", core({"family": "ets"}, y), ets_search_direct(y)),
        ("theta", core({"family": "theta"}, y), theta_direct(y)),
        ("croston", core({"family": "croston"}, demand), croston_direct(demand)),
    ]
    drift_theta = {"family": "combination", "members": [{"family": "drift"}, {"family": "theta"}]}
    both = (sarimax(y, (0, 1, 0), (0, 0, 0, 0), "c"), theta_direct(y))
    out.append(("combination drift+theta", core(drift_theta, y), lambda: [f() for f in both]))
    if "arima" in registry.FAMILIES:
        spec = {"family": "arima", "order": [0, 1, 1], "seasonal_order": [0, 1, 1]}
        out.append(
            ("arima (0,1,1)x(0,1,1)12", core(spec, y), sarimax(y, (0, 1, 1), (0, 1, 1, PERIOD)))
        )
    return out


def main() -> None:
    cores = len(os.sched_getaffinity(0)) if hasattr(os, "sched_getaffinity") else os.cpu_count()
    print(
        f"families benchmark: n={N}, m={PERIOD}, h={HORIZON}, median of {REPEATS}, "
        f"cores seen={cores}, BLAS threads=1"
    )
    print(f"{'family':<34}{'core s':>10}{'direct s':>10}{'ratio':>8}")
    pin_threads()
    for name, ours, direct in rows(monthly(), intermittent()):
        try:
            a, b = median_seconds(ours), median_seconds(direct)
        except Exception as exc:  # a family another developer is still building
            print(f"{name:<34}{'failed: ' + type(exc).__name__:>28}")
            continue
        print(f"{name:<34}{a:>10.4f}{b:>10.4f}{a / b:>8.2f}")


if __name__ == "__main__":
    main()
