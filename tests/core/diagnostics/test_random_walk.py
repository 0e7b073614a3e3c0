"""The graded random-walk verdict on seeded simulations (the procedure errs by design: each
check is allowed its level, so shares are asserted, not every seed)."""

from __future__ import annotations

from collections.abc import Callable

import numpy as np
from scipy.signal import lfilter

from service.core.diagnostics.random_walk import (
    CLOSE_TO_ONE,
    RandomWalkVerdict,
    random_walk,
)

SEEDS = range(30)
Maker = Callable[[np.random.Generator, int], np.ndarray]


def _verdicts(make: Maker, n: int = 250, period: int = 1) -> list[RandomWalkVerdict]:
    out = []
    for seed in SEEDS:
        v = random_walk(make(np.random.default_rng(seed), n), period)
        assert isinstance(v, RandomWalkVerdict)
        out.append(v)
    return out


def _ar1(rng: np.random.Generator, n: int, phi: float = 0.7) -> np.ndarray:
    shocks = rng.normal(size=n)
    first = shocks[:1] / np.sqrt(1 - phi**2)
    rest, _ = lfilter([1.0], [1.0, -phi], shocks[1:], zi=phi * first)
    return np.concatenate([first, rest])


def _walk(rng: np.random.Generator, n: int) -> np.ndarray:
    return np.cumsum(rng.normal(size=n))


def test_random_walks_are_recognised_without_drift() -> None:
    # Three checks share a 7 % error budget: expect ~93 %, demand 85 % of 30.
    verdicts = _verdicts(_walk)
    walks = [v for v in verdicts if v.is_random_walk]
    assert len(walks) >= 0.85 * len(verdicts)
    assert sum(v.with_drift for v in walks) <= 0.15 * len(walks) + 1
    assert {v.forecast_to_beat for v in walks if not v.with_drift} == {"naive"}


def test_random_walks_with_drift_are_found_with_their_drift() -> None:
    verdicts = _verdicts(lambda rng, n: np.cumsum(0.5 + rng.normal(size=n)))
    hits = [v for v in verdicts if v.is_random_walk and v.with_drift]
    assert len(hits) >= 0.85 * len(verdicts)
    assert all(v.evidence is not None and v.evidence.mean_difference.drifts for v in hits)
    assert {v.forecast_to_beat for v in hits} == {"drift"}


def test_stationary_ar1_is_not_a_random_walk() -> None:
    verdicts = _verdicts(_ar1)
    assert all(not v.is_random_walk for v in verdicts)
    assert all(v.differences == 0 for v in verdicts)
    assert all(v.forecast_to_beat is None for v in verdicts)


def test_integrated_ar1_is_not_a_random_walk() -> None:
    # Differences are AR(1) with phi 0.6: autocorrelated, so a model beats the naive forecast.
    verdicts = _verdicts(lambda rng, n: np.cumsum(_ar1(rng, n, 0.6)))
    assert sum(not v.is_random_walk for v in verdicts) >= 0.9 * len(verdicts)
    assert all("correlated" in v.reason for v in verdicts if not v.is_random_walk)


def test_the_grade_follows_the_power_of_the_length() -> None:
    # At 100 points AR(1) 0.86 is caught only 4 times in 5: a random walk cannot be told from
    # a slowly mean-reverting series. At 500 points every coefficient below 0.969 is.
    short = [v for v in _verdicts(_walk, n=100) if v.is_random_walk]
    long = [v for v in _verdicts(_walk, n=500) if v.is_random_walk and v.differences == 1]
    assert short and long
    assert {v.grade for v in short} == {"behaves_like_random_walk"}
    assert {v.grade for v in long} == {"random_walk"}
    assert short[0].decision is not None
    phi = short[0].decision.distinguishable_coefficient
    assert 0.8 < phi < 0.9
    assert 1.0 / phi > 1.1
    assert "cannot tell" in short[0].reason and "100 points" in short[0].reason
    assert "5 steps or more" in short[0].reason  # the half-life of AR(1) 0.857


def test_a_near_unit_root_series_is_said_to_be_indistinguishable() -> None:
    verdicts = _verdicts(lambda rng, n: _ar1(rng, n, 0.95), n=100)
    assert sum(v.grade == "behaves_like_random_walk" for v in verdicts) >= 0.5 * len(verdicts)


def test_a_persistent_stationary_series_behaves_like_a_random_walk_at_short_horizons() -> None:
    verdicts = _verdicts(lambda rng, n: _ar1(rng, n, 0.97), n=2000)
    slow = [v for v in verdicts if v.grade == "behaves_like_random_walk" and v.differences == 0]
    assert len(slow) >= 0.8 * len(verdicts)
    assert all("slowly" in v.reason and "within 5 %" in v.reason for v in slow)
    coefficients = [v.decision.coefficient for v in slow if v.decision is not None]
    assert len(coefficients) == len(slow) and min(c or 0.0 for c in coefficients) >= CLOSE_TO_ONE


def test_seasonal_random_walks_are_recognised() -> None:
    def seasonal(rng: np.random.Generator, n: int) -> np.ndarray:
        return np.cumsum(rng.normal(size=(n // 12 + 1, 12)), axis=0).ravel()[:n]

    verdicts = _verdicts(seasonal, n=120, period=12)
    hits = [v for v in verdicts if v.is_seasonal_random_walk]
    assert len(hits) >= 0.85 * len(verdicts)
    assert {v.forecast_to_beat for v in hits} == {"seasonal_naive"}
    assert not any(v.is_random_walk for v in verdicts)
    assert "seasonal naive" in hits[0].reason


def test_a_stable_season_with_noise_is_not_a_seasonal_random_walk() -> None:
    def stable(rng: np.random.Generator, n: int) -> np.ndarray:
        return 5 * np.sin(2 * np.pi * np.arange(n) / 12) + rng.normal(size=n)

    verdicts = _verdicts(stable, n=120, period=12)
    assert not any(v.is_seasonal_random_walk or v.is_random_walk for v in verdicts)


def test_isolated_lags_are_tolerated_and_listed() -> None:
    verdicts = _verdicts(_walk, n=400, period=12)
    tolerated = [v for v in verdicts if v.is_random_walk and v.tolerated_lags]
    assert tolerated, "with 24 lags examined some seeds show a chance lag"


def test_straight_line_is_not_a_random_walk() -> None:
    v = random_walk(np.arange(100.0) * 2.0 + 1.0, 1)
    assert isinstance(v, RandomWalkVerdict)
    assert not v.is_random_walk and v.grade == "not_random_walk"


def test_a_stationary_series_is_not_mistaken_for_a_seasonal_random_walk() -> None:
    # Its seasonal differences are over-differenced (lag-m autocorrelation near -0.5); with
    # the level already stationary, a chance -0.27 no longer passes for white noise.
    verdicts = _verdicts(lambda rng, n: _ar1(rng, n, 0.5), n=100, period=7)
    assert not any(v.is_seasonal_random_walk or v.is_random_walk for v in verdicts)
