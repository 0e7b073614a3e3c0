"""Benchmark prediction intervals against the hand example of tests/reference/README.md.

SOURCE for every check here: Hyndman & Athanasopoulos, Forecasting: Principles and
Practice, 3rd ed., §5.5, Table 5.2 (σ̂ = √(Σe²/(T−K−M)) and the four sd formulas), applied
to the hand series y = [10,14,8,12,11,16,9,13,13,17,10,15], T = 12, m = 4, whose values
that README prints rounded to 4 decimals. Two comparisons per family: the implementation
against an independent plain-Python evaluation of the formula (1e-10), and the printed
numbers to their printed precision.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from statistics import NormalDist

import numpy as np
import pandas as pd
import pytest

from service.core.models.drift import DriftSpec
from service.core.models.mean import MeanSpec
from service.core.models.naive import NaiveSpec
from service.core.models.seasonal_naive import SeasonalNaiveSpec

Y = [10.0, 14.0, 8.0, 12.0, 11.0, 16.0, 9.0, 13.0, 13.0, 17.0, 10.0, 15.0]
T, M, H = len(Y), 4, 4
Z95 = NormalDist().inv_cdf(0.975)
SERIES = pd.Series(Y, index=pd.date_range("2021-01-01", periods=T, freq="QS-JAN"))


@dataclass(frozen=True)
class Hand:
    """The formula's point path and sd per step, evaluated by hand."""

    point: list[float]
    sd: list[float]


def sigma(residuals: list[float], k: int) -> float:
    """σ̂ = √(Σe²/(T−K−M)); the residual list already has T−M entries."""
    return math.sqrt(sum(e * e for e in residuals) / (len(residuals) - k))


def hand_mean() -> Hand:
    level = sum(Y) / T
    s = sigma([v - level for v in Y], k=1)
    return Hand([level] * H, [s * math.sqrt(1 + 1 / T)] * H)


def hand_naive() -> Hand:
    s = sigma([Y[t] - Y[t - 1] for t in range(1, T)], k=0)
    return Hand([Y[-1]] * H, [s * math.sqrt(h) for h in range(1, H + 1)])


def hand_seasonal_naive() -> Hand:
    s = sigma([Y[t] - Y[t - M] for t in range(M, T)], k=0)
    point = [Y[T - M + (h - 1) % M] for h in range(1, H + 1)]
    return Hand(point, [s * math.sqrt((h - 1) // M + 1) for h in range(1, H + 1)])


def hand_drift() -> Hand:
    slope = (Y[-1] - Y[0]) / (T - 1)
    s = sigma([Y[t] - Y[t - 1] - slope for t in range(1, T)], k=1)
    point = [Y[-1] + slope * h for h in range(1, H + 1)]
    return Hand(point, [s * math.sqrt(h * (1 + h / (T - 1))) for h in range(1, H + 1)])


FAMILIES = {
    "mean": (MeanSpec(), hand_mean),
    "naive": (NaiveSpec(), hand_naive),
    "seasonal_naive": (SeasonalNaiveSpec(), hand_seasonal_naive),
    "drift": (DriftSpec(), hand_drift),
}


@pytest.mark.parametrize("family", list(FAMILIES))
def test_the_formula_to_1e10(family: str) -> None:
    # SOURCE: FPP3 §5.5 Table 5.2, evaluated independently above.
    spec, hand = FAMILIES[family]
    expected = hand()
    point, sd = expected.point, expected.sd
    forecast = spec.fit(SERIES, seasonal_period=M).forecast(H, [0.8, 0.95])
    np.testing.assert_allclose(forecast.point, point, rtol=0, atol=1e-10)
    for interval in forecast.intervals:
        z = NormalDist().inv_cdf(0.5 + interval.coverage / 2)
        np.testing.assert_allclose(
            interval.lower, np.subtract(point, np.multiply(z, sd)), rtol=0, atol=1e-10
        )
        np.testing.assert_allclose(
            interval.upper, np.add(point, np.multiply(z, sd)), rtol=0, atol=1e-10
        )


# SOURCE: tests/reference/README.md, "Hand series for the benchmark intervals" (FPP3 Table 5.2):
# 95 % interval at h = 1 and the sds, printed to 4 decimals (drift's first sd to 3).
PRINTED_H1 = {
    "mean": ((6.5415, 18.1251), 2.9551),
    "naive": ((5.6749, 24.3251), 4.7578),
    "seasonal_naive": ((10.1429, 15.8571), 1.4577),
    "drift": ((5.2862, 25.6229), 5.188),
}
PRINTED_SDS = {
    "naive": [4.7578, 6.7285, 8.2407, 9.5155],
    "drift": [5.188, 7.6366, 9.7059, 11.6008],
}


def _half_unit(printed: float) -> float:
    """Half a unit in the last printed decimal: the honest tolerance of a rounded value."""
    decimals = len(repr(printed).split(".")[1])
    return 0.5 * 10.0**-decimals + 1e-12


@pytest.mark.parametrize("family", list(PRINTED_H1))
def test_the_printed_95_interval_at_h1(family: str) -> None:
    # SOURCE: FPP3 §5.5 Table 5.2 via the rounded values in tests/reference/README.md.
    spec, hand = FAMILIES[family]
    (lower, upper), sd = PRINTED_H1[family]
    forecast = spec.fit(SERIES, seasonal_period=M).forecast(1, [0.95])
    assert abs(forecast.intervals[0].lower[0] - lower) <= _half_unit(lower)
    assert abs(forecast.intervals[0].upper[0] - upper) <= _half_unit(upper)
    assert abs(hand().sd[0] - sd) <= _half_unit(sd)
    # The bounds are point ± 1.959964 sd (the normal quantile, Table 5.1 of the same source).
    half_width = (forecast.intervals[0].upper[0] - forecast.intervals[0].lower[0]) / 2
    assert half_width == pytest.approx(Z95 * hand().sd[0], abs=1e-10)


@pytest.mark.parametrize("family", list(PRINTED_SDS))
def test_the_printed_sds_for_h_1_to_4(family: str) -> None:
    # SOURCE: FPP3 §5.5 Table 5.2 via the rounded values in tests/reference/README.md.
    spec, _ = FAMILIES[family]
    forecast = spec.fit(SERIES, seasonal_period=M).forecast(H, [0.95])
    sd = (forecast.intervals[0].upper - forecast.point) / Z95
    for got, printed in zip(sd, PRINTED_SDS[family], strict=True):
        assert abs(got - printed) <= _half_unit(printed)
