"""Speed of model "auto" on hourly series with two periods, beside the single-period path.

Run: python -m tests.benchmarks.periods_speed [POINTS ...]   (default 2000 10000)

For each length, in one process on one BLAS thread (as in the pool's workers), the same
seeded hourly counts (tests/multi_period_series.py) go through ``runtime.jobs.forecast`` twice,
alternating: with ``seasonal_period`` [24, 168] (diagnostics by MSTL, MSTL and harmonic
regression among the candidates) and with 24 alone (the single-period path as before). The
targets are 3 s at 2,000 points and 8 s at 10,000 for the two-period path; the load average is
printed beside each figure, since the machine is shared. Figures: tests/benchmarks/RESULTS.md.
"""

from __future__ import annotations

import os
import sys
import time
import warnings

from service.api.schemas.forecasts import ForecastRequest
from service.api.tasks import forecast_task
from service.config import Settings
from service.runtime import jobs
from service.runtime.workers import pin_threads
from tests.multi_period_series import hourly_counts

TARGETS = {2000: 3.0, 10000: 8.0}


def timed(points: int, period: object) -> tuple[float, str]:
    """Seconds of one automatic forecast a day ahead, and the chosen model's label."""
    y = hourly_counts(weeks=points // 168 + 1).iloc[:points]
    body = ForecastRequest.model_validate(
        {
            "series": {
                "start": y.index[0].isoformat(),
                "frequency": "h",
                "values": y.tolist(),
                "seasonal_period": period,
            },
            "horizon": 24,
        }
    )
    task, _ = forecast_task(body, Settings(api_keys="", max_points=100_000))
    start = time.perf_counter()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        answer = jobs.forecast(task)
    return time.perf_counter() - start, answer.description.label


def main(args: list[str]) -> None:
    pin_threads()
    lengths = [int(a) for a in args] or [2000, 10000]
    print(f"cores seen: {os.cpu_count()}")
    timed(500, [24, 168])  # imports and first-call costs out of the figures
    for points in lengths:
        for name, period in (("two periods", [24, 168]), ("one period", 24)):
            seconds, label = timed(points, period)
            load = os.getloadavg()[0]
            target = (
                f" (target {TARGETS[points]:.0f} s)"
                if points in TARGETS and name == "two periods"
                else ""
            )
            print(
                f"{points:6d} points, {name:11s}: {seconds:6.2f} s{target}  "
                f"load {load:.1f}  {label}",
                flush=True,
            )


if __name__ == "__main__":
    main(sys.argv[1:])
