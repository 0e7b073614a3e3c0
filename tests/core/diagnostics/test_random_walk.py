"""The random-walk verdict on seeded simulations (many seeds: a 5 % test errs by design)."""

from __future__ import annotations

import numpy as np

from service.core.diagnostics.random_walk import (
    RandomWalkVerdict,
    chance_allowance,
    isolated,
    random_walk,
)

SEEDS = range(30)


def _verdicts(make: object, n: int = 250, period: int = 1) -> list[RandomWalkVerdict]:
    out = []
    for seed in SEEDS:
        v = random_walk(make(np.random.default_rng(seed), n), period)  # type: ignore[operator]
        assert isinstance(v, RandomWalkVerdict)
        out.append(v)
    return out


def _ar1(rng: np.random.Generator, n: int, phi: float = 0.7) -> np.ndarray:
    shocks = rng.normal(size=n + 100)
    out = np.zeros(n + 100)
    for t in range(1, n + 100):
        out[t] = phi * out[t - 1] + shocks[t]
    return out[100:]


def test_random_walks_are_random_walks_without_drift() -> None:
    # ADF at level, Ljung-Box and the ACF count each err ~5 %: expect ~85 %, demand 75 %.
    verdicts = _verdicts(lambda rng, n: np.cumsum(rng.normal(size=n)))
    walks = [v for v in verdicts if v.is_random_walk]
    assert len(walks) >= 0.75 * len(verdicts)
    assert sum(v.with_drift for v in walks) <= 0.15 * len(walks) + 1


def test_random_walks_with_drift_are_found_with_their_drift() -> None:
    verdicts = _verdicts(lambda rng, n: np.cumsum(0.5 + rng.normal(size=n)))
    hits = [v for v in verdicts if v.is_random_walk and v.with_drift]
    assert len(hits) >= 0.75 * len(verdicts)
    assert all(v.evidence["mean_difference"]["p_value"] < 0.05 for v in hits)


def test_stationary_ar1_is_not_a_random_walk() -> None:
    verdicts = _verdicts(_ar1)
    assert all(not v.is_random_walk for v in verdicts)
    assert sum(v.differences == 0 for v in verdicts) >= 0.9 * len(verdicts)


def test_integrated_ar1_is_not_a_random_walk() -> None:
    # Differences are AR(1) with phi 0.6: autocorrelated, so a model beats the naive forecast.
    verdicts = _verdicts(lambda rng, n: np.cumsum(_ar1(rng, n, 0.6)))
    assert sum(not v.is_random_walk for v in verdicts) >= 0.9 * len(verdicts)


def test_isolated_lags_are_tolerated_and_said() -> None:
    verdicts = _verdicts(lambda rng, n: np.cumsum(rng.normal(size=n)), n=400, period=12)
    tolerated = [v for v in verdicts if v.is_random_walk and v.tolerated_lags]
    assert tolerated, "with 24 lags examined some seeds show a chance lag"
    for v in tolerated:
        assert "chance" in v.reason
        assert isolated(v.tolerated_lags)


def test_chance_allowance_and_adjacency() -> None:
    assert chance_allowance(10) == 2
    assert chance_allowance(24) == 3
    assert isolated((3, 9)) and not isolated((10, 11))


def test_straight_line_is_not_a_random_walk() -> None:
    v = random_walk(np.arange(100.0) * 2.0 + 1.0, 1)
    assert isinstance(v, RandomWalkVerdict)
    assert not v.is_random_walk
