"""The weighted symmetric unit-root test, its critical values and its power, by seeded simulation.

The random-walk verdict asks whether a series with uncorrelated differences is a random walk or
a stationary series that returns to its mean. For that question the weighted symmetric
estimator of the autoregressive coefficient (Pantula, Gonzalez-Farias & Fuller 1994; from
memory) gives a more powerful test than the Dickey-Fuller regression when the series starts in
its stationary distribution, as a series observed in mid-course does (measured:
``python -m tests.benchmarks.random_walk --tests``, figures in tests/benchmarks/RESULTS.md).

Its critical values and power have no closed form. Both come from ``simulate`` with a fixed
seed: the critical values as a response surface a + b/n + c/n² in the series length (the
method of MacKinnon 2010) fitted to simulated quantiles at 20 to 5,000 points, and the power as
the AR(1) coefficient the test catches 4 times in 5. ``python -m
service.core.diagnostics.symmetric_test`` prints both tables again; a test re-runs one length.
"""

from __future__ import annotations

import math
from typing import Literal

import numpy as np

Terms = Literal["c", "ct"]

SEED = 20_261_202
LENGTHS = (20, 25, 30, 40, 50, 75, 100, 150, 200, 300, 500, 750, 1000, 2000, 5000)
LEVELS = (0.01, 0.025, 0.05, 0.10)
CRITICAL_REPLICATIONS = 20_000
POWER_REPLICATIONS = 2_000
POWER = 0.8
"""Distinguishable means caught 4 times in 5 (a common power target in test design)."""
MIN_LENGTH = LENGTHS[0]

SURFACE: dict[str, dict[float, tuple[float, float, float]]] = {
    "c": {
        0.01: (-19.346, 47.041, 273.557),
        0.025: (-15.782, 31.232, 167.048),
        0.05: (-13.057, 20.731, 133.816),
        0.10: (-10.173, 8.902, 82.467),
    },
    "ct": {
        0.01: (-28.196, 144.044, -168.901),
        0.025: (-23.962, 102.773, -151.335),
        0.05: (-20.738, 76.258, -63.712),
        0.10: (-17.202, 42.647, 36.709),
    },
}
"""(a, b, c) of the critical value a + b/n + c/n² per deterministic terms and level."""

DISTINGUISHABLE: dict[str, tuple[float, ...]] = {
    "c": (
        0.3285,
        0.4524,
        0.5299,
        0.65,
        0.7112,
        0.8083,
        0.8574,
        0.9019,
        0.9286,
        0.9523,
        0.9712,
        0.9809,
        0.9853,
        0.9926,
        0.9971,
    ),
    "ct": (
        0.0,
        0.0063,
        0.1585,
        0.34,
        0.4621,
        0.6267,
        0.7198,
        0.8095,
        0.856,
        0.9032,
        0.9404,
        0.9607,
        0.9704,
        0.985,
        0.994,
    ),
}
"""Per entry of LENGTHS: the AR(1) coefficient the test (at the level of ``POWER_LEVEL``)
rejects with probability POWER; any coefficient below it is distinguishable from 1."""

POWER_LEVEL: dict[str, float] = {"c": 0.05, "ct": 0.01}


def statistic(y: np.ndarray, terms: Terms) -> tuple[float, float]:
    """n (ρ̂ - 1) and ρ̂ of the weighted symmetric estimator on the demeaned (detrended) series."""
    stats, rho = row_statistics(y[None, :], terms)
    return float(stats[0]), float(rho[0])


def row_statistics(y: np.ndarray, terms: Terms) -> tuple[np.ndarray, np.ndarray]:
    """Row-wise statistic and coefficient: ρ̂ = Σ z_t z_{t-1} / (Σ_{2..n-1} z_t² + Σ z_t² / n)."""
    n = y.shape[1]
    z = y - y.mean(axis=1, keepdims=True)
    if terms == "ct":
        t = np.arange(n, dtype=float)
        t -= t.mean()
        z = z - np.outer(z @ t / (t @ t), t)
    lagged = np.einsum("ij,ij->i", z[:, 1:], z[:, :-1])
    inner = np.einsum("ij,ij->i", z[:, 1:-1], z[:, 1:-1])
    rho = lagged / (inner + np.einsum("ij,ij->i", z, z) / n)
    return n * (rho - 1.0), rho


def critical_value(terms: Terms, level: float, n: int) -> float:
    """The lower-tail critical value at ``level`` for a series of n points (n >= MIN_LENGTH)."""
    a, b, c = SURFACE[terms][level]
    return a + b / n + c / n**2


def distinguishable_coefficient(terms: Terms, n: int) -> float:
    """The AR(1) coefficient below which the test tells a stationary series from a random walk
    at least 4 times in 5, interpolated in log n (past the table: its last value)."""
    table = DISTINGUISHABLE[terms]
    return float(np.interp(math.log(n), np.log(LENGTHS), table))


def half_life(coefficient: float) -> float | None:
    """Steps for an AR(1) with this coefficient to close half of a gap to its mean."""
    if not 0.0 < coefficient < 1.0:
        return None
    return math.log(0.5) / math.log(coefficient)


def _stream(index: int, terms: Terms, purpose: int) -> np.random.Generator:
    return np.random.default_rng([SEED, index, int(terms == "ct"), purpose])


def simulated_quantiles(index: int, terms: Terms) -> np.ndarray:
    """Quantiles at LEVELS of the statistic over CRITICAL_REPLICATIONS random walks."""
    n = LENGTHS[index]
    rng = _stream(index, terms, 0)
    chunk = 2_000
    values = [
        row_statistics(np.cumsum(rng.standard_normal((chunk, n)), axis=1), terms)[0]
        for _ in range(CRITICAL_REPLICATIONS // chunk)
    ]
    return np.quantile(np.concatenate(values), LEVELS)


def simulated_power_coefficient(index: int, terms: Terms, critical: float) -> float:
    """Bisection for the AR(1) coefficient rejected with probability POWER (common shocks)."""
    n = LENGTHS[index]
    shocks = _stream(index, terms, 1).standard_normal((POWER_REPLICATIONS, n))
    low, high = 0.0, 1.0
    for _ in range(14):
        middle = 0.5 * (low + high)
        power = float(np.mean(row_statistics(_ar1(shocks, middle), terms)[0] < critical))
        low, high = (middle, high) if power >= POWER else (low, middle)
    return round(0.5 * (low + high), 4)


def _ar1(shocks: np.ndarray, phi: float) -> np.ndarray:
    """Stationary AR(1) paths: the first value drawn from the stationary distribution."""
    from scipy.signal import lfilter

    first = shocks[:, :1] / math.sqrt(1.0 - phi**2)
    rest, _ = lfilter([1.0], [1.0, -phi], shocks[:, 1:], axis=1, zi=phi * first)
    return np.concatenate([first, rest], axis=1)


def fit_surface(quantiles: np.ndarray) -> np.ndarray:
    """Least-squares (a, b, c) per level of quantiles[i] ≈ a + b/n_i + c/n_i² over LENGTHS."""
    n = np.asarray(LENGTHS, dtype=float)
    design = np.column_stack([np.ones_like(n), 1.0 / n, 1.0 / n**2])
    coefficients, *_ = np.linalg.lstsq(design, quantiles, rcond=None)
    return np.asarray(coefficients.T)


Surface = dict[str, dict[float, tuple[float, float, float]]]


def simulate() -> tuple[Surface, dict[str, tuple[float, ...]]]:
    """Both tables from scratch (a few minutes on one core)."""
    surface: Surface = {}
    power: dict[str, tuple[float, ...]] = {}
    for terms in ("c", "ct"):
        quantiles = np.array([simulated_quantiles(i, terms) for i in range(len(LENGTHS))])
        fitted = fit_surface(quantiles)
        rows = zip(LEVELS, fitted, strict=True)
        surface[terms] = {level: (_r(row[0]), _r(row[1]), _r(row[2])) for level, row in rows}
        a, b, c = surface[terms][POWER_LEVEL[terms]]
        power[terms] = tuple(
            simulated_power_coefficient(i, terms, a + b / n + c / n**2)
            for i, n in enumerate(LENGTHS)
        )
    return surface, power


def _r(value: float) -> float:
    return round(float(value), 3)


if __name__ == "__main__":
    tables = simulate()
    print("SURFACE =", tables[0])
    print("DISTINGUISHABLE =", tables[1])
