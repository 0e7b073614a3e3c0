"""Empirical coverage of ETS intervals on paths simulated from the model itself.

Seeded paths; the 80 % and 95 % intervals at each step 1..h must cover within 3 points
of nominal. ETS(A,A,A) and ETS(M,N,N) are forecast with their true
smoothing parameters and σ² estimated from each path's residuals (this checks the analytic
and the simulated interval paths); ETS(A,N,N) is re-estimated on every path (this adds the
estimation error a user sees). Coverage is pooled over the steps 1..h (3 points); each step
alone gets a looser 6-point band, since a few hundred paths give a 2-point binomial sd.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from service.core.models.ets.family import EtsSpec
from service.core.models.ets.fitted import EtsFitted

HORIZON = 6
TOLERANCE = 0.03
STEP_TOLERANCE = 0.06
LEVELS = (0.8, 0.95)


def simulate_paths(
    spec: EtsSpec,
    smoothing: dict[str, float],
    initial: tuple[float, ...],
    sigma2: float,
    length: int,
    paths: int,
    seed: int,
    period: int = 1,
) -> np.ndarray:
    """Paths of shape (length, paths) drawn by statsmodels from the known model."""
    fitted = EtsFitted(
        spec, spec, _series(np.full(length, initial[0])), period, smoothing, initial, "known"
    )
    rng = np.random.default_rng(seed)
    errors = rng.normal(0.0, np.sqrt(sigma2), size=(length, paths))
    draws = fitted.results().simulate(
        length, anchor="start", repetitions=paths, random_errors=errors
    )
    return np.asarray(draws, dtype=float).reshape(length, paths)


def _series(values: np.ndarray) -> pd.Series:
    return pd.Series(values, index=pd.date_range("2000-01-01", periods=values.size, freq="MS"))


def coverage(hits: np.ndarray) -> np.ndarray:
    """Share of paths covered at each step."""
    return hits.mean(axis=0)


def check(hits: dict[float, np.ndarray]) -> None:
    for level, table in hits.items():
        rates = coverage(table)
        assert abs(float(table.mean()) - level) <= TOLERANCE, (level, rates)
        assert np.all(np.abs(rates - level) <= STEP_TOLERANCE), (level, rates)


def known_parameter_hits(
    spec: EtsSpec,
    smoothing: dict[str, float],
    initial: tuple[float, ...],
    sigma2: float,
    n: int,
    paths: int,
    seed: int,
    period: int = 1,
) -> dict[float, np.ndarray]:
    data = simulate_paths(spec, smoothing, initial, sigma2, n + HORIZON, paths, seed, period)
    hits = {level: np.zeros((paths, HORIZON), dtype=bool) for level in LEVELS}
    for p in range(paths):
        fitted = EtsFitted(spec, spec, _series(data[:n, p]), period, smoothing, initial, "known")
        fc = fitted.forecast(HORIZON, LEVELS)
        future = data[n:, p]
        for interval in fc.intervals:
            hits[interval.coverage][p] = (interval.lower <= future) & (future <= interval.upper)
    return hits


@pytest.mark.slow
def test_analytic_intervals_of_ets_aaa_cover() -> None:
    spec = EtsSpec("add", "add", False, "add")
    season = tuple(float(v) for v in 5 * np.sin(2 * np.pi * np.arange(4) / 4))
    hits = known_parameter_hits(
        spec,
        {"alpha": 0.3, "beta": 0.05, "gamma": 0.1},
        (50.0, 0.5, *season),
        4.0,
        n=40,
        paths=500,
        seed=101,
        period=4,
    )
    check(hits)


@pytest.mark.slow
def test_simulated_intervals_of_ets_mnn_cover() -> None:
    spec = EtsSpec("mul", "none", False, "none")
    hits = known_parameter_hits(spec, {"alpha": 0.4}, (100.0,), 0.05**2, n=30, paths=300, seed=202)
    check(hits)


@pytest.mark.slow
def test_estimated_ets_ann_intervals_cover() -> None:
    spec = EtsSpec("add", "none", False, "none")
    n, paths = 150, 300
    data = simulate_paths(spec, {"alpha": 0.3}, (10.0,), 1.0, n + HORIZON, paths, seed=303)
    hits = {level: np.zeros((paths, HORIZON), dtype=bool) for level in LEVELS}
    for p in range(paths):
        fc = spec.fit(_series(data[:n, p]), 1).forecast(HORIZON, LEVELS)
        future = data[n:, p]
        for interval in fc.intervals:
            hits[interval.coverage][p] = (interval.lower <= future) & (future <= interval.upper)
    check(hits)


@pytest.mark.slow
def test_the_generator_has_the_stated_innovation_variance() -> None:
    # Guards the tests above against a degenerate or mis-scaled generator.
    spec = EtsSpec("add", "none", False, "none")
    data = simulate_paths(spec, {"alpha": 0.3}, (10.0,), 1.0, 2, 20000, seed=404)
    assert abs(np.var(data[0] - 10.0) - 1.0) < 0.05
