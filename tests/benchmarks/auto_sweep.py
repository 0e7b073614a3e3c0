"""Model "auto" against a user's full ETS sweep by AICc, alternated in one process.

Run: python -m tests.benchmarks.auto_sweep [--rounds 7]

The issue-16 targets: auto's median <= 0.5 s per 200-point monthly series on an idle machine,
and <= 0.3 x the sweep measured in the same run. "auto" is what a pool worker runs for model
"auto" (``service.runtime.jobs.forecast`` on the task the API builds from the request body of
``tests.benchmarks.service.auto_body``); every round uses a distinct last value, so nothing is
reused between rounds. The sweep is what a user would write with statsmodels alone:
``ETSModel(...).fit()`` with its defaults over the 15 admissible error / trend / damping /
season combinations (no multiplicative trend, no additive error with a multiplicative season),
m = 12, the lowest AICc kept. One BLAS thread, as in the pool's workers. The rounds alternate
auto and sweep, so load from other jobs falls on both; the load average is printed beside the
figures, and CPU seconds beside the wall time (on a loaded machine the CPU ratio of the serial
runs is the steadier estimate of the idle wall ratio). "auto, one lent core" is the same job
when the pool lends it an idle worker's core (runtime/spread.py): it only gains on a machine
with a free core. After the rounds, auto's stages (diagnostics, then select's own laps) are
the medians of a few direct ``diagnose`` + ``select`` calls on the same series.
"""

from __future__ import annotations

import argparse
import os
import resource
import time
import warnings
from typing import Any

import numpy as np
import pandas as pd

from service.runtime.workers import pin_threads

PERIOD = 12
COMBINATIONS = tuple(
    (error, trend, damped, season)
    for error in ("add", "mul")
    for trend, damped in ((None, False), ("add", False), ("add", True))
    for season in (None, "add", "mul")
    if not (error == "add" and season == "mul")
)


def load_text() -> str:
    """The 1, 5 and 15 minute load averages."""
    return "load average " + " ".join(f"{v:.2f}" for v in os.getloadavg())


def sweep(y: pd.Series) -> tuple[float, str]:
    """Seconds of a full ETS sweep by AICc with statsmodels' defaults, and its winner."""
    from statsmodels.tsa.exponential_smoothing.ets import ETSModel

    start = time.perf_counter()
    best = (np.inf, "")
    for error, trend, damped, season in COMBINATIONS:
        model = ETSModel(
            y,
            error=error,
            trend=trend,
            damped_trend=damped,
            seasonal=season,
            seasonal_periods=PERIOD if season else None,
        )
        result = model.fit(disp=False)
        if result.aicc < best[0]:
            best = (float(result.aicc), f"{error} {trend} {damped} {season}")
    return time.perf_counter() - start, best[1]


def cpu_seconds() -> float:
    """CPU seconds of this process and of its reaped children (a lent core's helpers)."""
    own = resource.getrusage(resource.RUSAGE_SELF)
    children = resource.getrusage(resource.RUSAGE_CHILDREN)
    return own.ru_utime + own.ru_stime + children.ru_utime + children.ru_stime


def auto_task(salt: float) -> Any:
    """The task a pool worker gets for the benchmark's auto request body."""
    from service.api.schemas.forecasts import ForecastRequest
    from service.api.tasks import forecast_task
    from service.config import Settings
    from tests.benchmarks.service import auto_body

    return forecast_task(ForecastRequest.model_validate(auto_body(salt)), Settings())[0]


def auto_seconds(task: Any, helpers: int = 0) -> tuple[float, str]:
    """Seconds of what a worker runs for model "auto" (with ``helpers`` lent cores, as when
    the pool finds its other workers idle: runtime/spread.py), and the delivered label."""
    from service.runtime import jobs
    from service.runtime.spread import with_helpers

    start = time.perf_counter()
    answer = with_helpers(helpers, jobs.forecast, task)
    return time.perf_counter() - start, answer.description.label


def stages(y: pd.Series, repeats: int = 3) -> dict[str, float]:
    """Median seconds per stage of diagnose + select on ``y``."""
    from service.core.diagnostics.report import diagnose
    from service.core.selection.auto import select
    from tests.benchmarks.selection_speed import HORIZON, LEVELS

    laps: list[dict[str, float]] = []
    for _ in range(repeats):
        start = time.perf_counter()
        report = diagnose(y, PERIOD)
        diagnostics = time.perf_counter() - start
        result = select(y, PERIOD, HORIZON, LEVELS, diagnostics=report)
        laps.append({"diagnostics": diagnostics, **result.seconds})
    return {name: float(np.median([lap[name] for lap in laps])) for name in laps[0]}


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--rounds", type=int, default=7, help="alternated rounds (default 7)")
    args = parser.parse_args()
    import service.runtime.jobs  # noqa: F401  (what the fork server preloads)
    from tests.benchmarks.selection_speed import series

    pin_threads()
    warnings.simplefilter("ignore")
    y = series()
    from service.runtime.spread import cores_idle

    print(
        f"before: {load_text()}; idle cores now (what the pool asks before lending): {cores_idle()}"
    )
    auto_seconds(auto_task(-1.0))  # first calls in the process: outside the timing
    auto_seconds(auto_task(-1.0), helpers=1)
    sweep(y)
    runs: dict[str, Any] = {
        "auto": lambda i: auto_seconds(auto_task(1.0 + i))[1],
        "auto, one lent core": lambda i: auto_seconds(auto_task(1.0 + i), helpers=1)[1],
        "sweep": lambda i: sweep(y)[1],
    }
    times: dict[str, list[float]] = {name: [] for name in runs}
    cpu: dict[str, list[float]] = {name: [] for name in runs}
    labels = {}
    for i in range(args.rounds):
        for name, run in runs.items():
            start, used = time.perf_counter(), cpu_seconds()
            labels[name] = run(i)
            times[name].append(time.perf_counter() - start)
            cpu[name].append(cpu_seconds() - used)
    print(f"after the rounds: {load_text()}; {args.rounds} alternated rounds, one BLAS thread")
    sweep_median = float(np.median(times["sweep"]))
    sweep_cpu = float(np.median(cpu["sweep"]))
    for name, values in times.items():
        median = float(np.median(values))
        what = "full ETS sweep by AICc (15 fits)" if name == "sweep" else name
        line = f"{what:34s} median {median:.3f} s (min {min(values):.3f}, max {max(values):.3f})"
        line += f", CPU {np.median(cpu[name]):.3f} s"
        if name != "sweep":
            ratios = [a / s for a, s in zip(values, times["sweep"], strict=True)]
            line += f"; / sweep: {median / sweep_median:.2f} (per-round {np.median(ratios):.2f})"
            line += f", CPU / sweep CPU {np.median(cpu[name]) / sweep_cpu:.2f}"
        print(f"{line}; {'AICc winner' if name == 'sweep' else 'delivered'} {labels[name]}")
    print("targets: auto <= 0.5 s on an idle machine and <= 0.3 x the sweep")
    laps = stages(y)
    print(
        "auto's stages (median of 3 diagnose + select calls): "
        + ", ".join(f"{name} {value:.3f} s" for name, value in laps.items())
    )
    print(f"end: {load_text()}")


if __name__ == "__main__":
    main()
