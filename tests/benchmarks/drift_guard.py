"""The random-walk guard's drift forecast against naive mixed in, on seeded drifting walks.

Run: python -m tests.benchmarks.drift_guard [--series 200]. Each walk (60-240 monthly
points, steps of sd 3 with a mean drawn from ±0.5 sd) goes through ``select`` as the service
runs it (diagnostics given); where the random-walk guard took the drift forecast (alone, or
mixed with naive by the benchmark guard when drift lost to naive in the backtest), it prints the
out-of-sample MASE over the next 12 points of drift, naive and their inverse-square mix.
"""

from __future__ import annotations

import argparse
import os
import time

import numpy as np
import pandas as pd

from service.core.diagnostics.report import diagnose
from service.core.selection.auto import select

HORIZON = 12


def one(seed: int) -> dict[str, float | str]:
    """One seeded walk: the guard's outcome and the three forecasts' out-of-sample MASE."""
    rng = np.random.default_rng(1000 + seed)
    n = int(rng.integers(60, 240))
    sd = 3.0
    mu = rng.uniform(0.0, 0.5) * sd * rng.choice([-1, 1])
    y = 500 + np.concatenate([[0.0], np.cumsum(rng.normal(mu, sd, n + HORIZON - 1))])
    hist, future = y[:n], y[n:]
    s = pd.Series(hist, index=pd.date_range("2000-01-01", periods=n, freq="MS"))
    sel = select(s, 12, HORIZON, diagnostics=diagnose(s, 12)).selection
    scores = {e.label: e.score for e in sel.ranking}
    steps = np.diff(hist)
    scale = float(np.mean(np.abs(steps)))
    naive = np.full(HORIZON, hist[-1])
    drift = hist[-1] + steps.mean() * np.arange(1, HORIZON + 1)
    bn, bd = scores.get("naive", np.nan), scores.get("drift", np.nan)
    mix = (naive / bn**2 + drift / bd**2) / (1 / bn**2 + 1 / bd**2)

    def mase(f: np.ndarray) -> float:
        return float(np.mean(np.abs(f - future)) / scale)

    return {
        "drift_guard": float(sel.rule == "naive_guard" and sel.chosen != "naive"),
        "drift_lost": float(bd > bn),
        "naive": mase(naive),
        "drift": mase(drift),
        "mix": mase(mix),
    }


def main() -> None:
    parser = argparse.ArgumentParser()
    parser.add_argument("--series", type=int, default=200)
    args = parser.parse_args()
    start = time.perf_counter()
    table = pd.DataFrame([one(seed) for seed in range(args.series)])
    print(f"{len(table)} walks, {time.perf_counter() - start:.0f} s, load {os.getloadavg()[0]:.2f}")
    delivered = table[table.drift_guard == 1.0]
    lost = delivered[delivered.drift_lost == 1.0]
    print(
        f"the guard took drift on {len(delivered)}; of those, drift lost to naive in the "
        f"backtest (naive mixed in) on {len(lost)}"
    )
    for name, part in (("guard took drift", delivered), ("drift lost in the backtest", lost)):
        means = part[["drift", "mix", "naive"]].mean()
        better = int((part.drift < part.naive).sum())
        print(
            f"{name}: mean MASE drift {means.drift:.3f}, mix {means.mix:.3f}, "
            f"naive {means.naive:.3f}; drift below naive on {better} of {len(part)}"
        )


if __name__ == "__main__":
    main()
