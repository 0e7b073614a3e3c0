"""The seeded series of tests/benchmarks/seeded_accuracy.py: reproducible, every kind, the
documented lengths (the benchmark's figures in RESULTS.md depend on all three)."""

from __future__ import annotations

import numpy as np

from tests.benchmarks.seeded_accuracy import MONTHLY, YEARLY, seeded_cases


def test_every_kind_comes_with_its_period_and_length() -> None:
    cases = seeded_cases("all", 2)
    kinds = [kind for kind, _ in cases]
    assert kinds == [*YEARLY, *YEARLY, *MONTHLY, *MONTHLY]
    for kind, case in cases:
        yearly = kind in YEARLY
        assert case.period == (1 if yearly else 12)
        assert case.horizon == (6 if yearly else 12)
        low, high = (24, 60) if yearly else (60, 180)
        assert low <= len(case.y) - case.horizon <= high
        assert np.all(np.isfinite(case.y.to_numpy()))


def test_the_same_seed_draws_the_same_series() -> None:
    first, again = seeded_cases("yearly", 1), seeded_cases("yearly", 1)
    for (_, a), (_, b) in zip(first, again, strict=True):
        assert a.y.equals(b.y)
    values = [case.y.iloc[:24].to_numpy() for _, case in first]
    assert len({v.tobytes() for v in values}) == len(values)
