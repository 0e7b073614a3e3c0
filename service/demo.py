"""Demo data: an invented scenario, generated with a fixed seed (no real data).

Brightwell Supply, a made-up distributor, has six series: daily parcels at its Eastgate
depot, weekly orders at its north warehouse, hourly requests to its stock-check service,
monthly energy use at its Millbrook site, daily demand for one spare part (mostly zeros),
and a daily fuel price index that wanders like a random walk.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd

SEED = 20261202


@dataclass(frozen=True)
class DemoSeries:
    """One scenario series with the horizon its users usually ask for."""

    name: str
    label: str
    start: str
    frequency: str
    values: list[float]
    horizon: int


def _rng(offset: int) -> np.random.Generator:
    return np.random.default_rng(SEED + offset)


def parcels() -> DemoSeries:
    """Daily parcels: upward trend, a weekly cycle with quiet Sundays."""
    n, rng = 364, _rng(1)
    t = np.arange(n)
    week = np.array([1.15, 1.1, 1.05, 1.0, 1.2, 0.8, 0.45])
    start = pd.Timestamp("2025-01-06")  # a Monday
    level = 400 + 0.35 * t
    y = level * week[t % 7] + rng.normal(0, 18, n)
    return DemoSeries(
        "parcels",
        "Eastgate depot daily parcels",
        start.date().isoformat(),
        "P1D",
        np.round(y, 0).tolist(),
        14,
    )


def orders() -> DemoSeries:
    """Weekly orders: three years with a yearly cycle peaking before the winter holidays."""
    n, rng = 156, _rng(2)
    t = np.arange(n)
    y = 1200 + 2.0 * t + 220 * np.sin(2 * np.pi * (t - 30) / 52) + rng.normal(0, 45, n)
    return DemoSeries(
        "orders", "North warehouse weekly orders", "2023-01-02", "P1W", np.round(y, 0).tolist(), 13
    )


def requests() -> DemoSeries:
    """Hourly requests: four weeks with a daily cycle and quieter weekends."""
    n, rng = 24 * 28, _rng(3)
    t = np.arange(n)
    hour = t % 24
    day = (t // 24) % 7
    daily = 1 + 0.8 * np.exp(-((hour - 11) ** 2) / 18)
    weekend = np.where(day >= 5, 0.6, 1.0)
    y = rng.poisson(300 * daily * weekend)
    return DemoSeries(
        "requests",
        "Stock-check service hourly requests",
        "2025-03-03T00:00:00",
        "PT1H",
        y.astype(float).tolist(),
        48,
    )


def energy() -> DemoSeries:
    """Monthly energy use (MWh): ten years, seasonal swing growing with the level."""
    n, rng = 120, _rng(4)
    t = np.arange(n)
    level = 80 * (1.004**t)
    season = 1 + 0.25 * np.cos(2 * np.pi * t / 12)
    y = level * season * np.exp(rng.normal(0, 0.03, n))
    return DemoSeries(
        "energy",
        "Millbrook site monthly energy use (MWh)",
        "2016-01-01",
        "P1M",
        np.round(y, 2).tolist(),
        12,
    )


def spares() -> DemoSeries:
    """Daily demand for one spare part: mostly zeros, occasional orders of a few units."""
    n, rng = 200, _rng(5)
    occurs = rng.random(n) < 0.22
    sizes = rng.integers(1, 7, n)
    y = np.where(occurs, sizes, 0)
    return DemoSeries(
        "spares", "Spare part 7A daily demand", "2025-01-01", "P1D", y.astype(float).tolist(), 28
    )


def fuel() -> DemoSeries:
    """A daily fuel price index: a random walk, which no model forecasts better than naive."""
    n, rng = 300, _rng(7)
    y = 100 + np.cumsum(rng.normal(0, 0.8, n))
    return DemoSeries(
        "fuel", "Fuel price index (daily)", "2025-01-01", "P1D", np.round(y, 3).tolist(), 14
    )


SCENARIO: dict[str, Callable[[], DemoSeries]] = {
    f.__name__: f for f in (parcels, orders, requests, energy, spares, fuel)
}


def series_body(name: str) -> dict[str, Any]:
    """The wire form of one demo series."""
    if name not in SCENARIO:
        raise KeyError(f"unknown demo series {name!r}; choose from {', '.join(SCENARIO)}")
    s = SCENARIO[name]()
    return {"name": s.label, "start": s.start, "frequency": s.frequency, "values": s.values}


def request_body(name: str, kind: str = "forecast", horizon: int | None = None) -> dict[str, Any]:
    """A request body for one endpoint kind: forecast, diagnostics or backtest."""
    s = SCENARIO[name]()
    body: dict[str, Any] = {"series": series_body(name)}
    if kind == "forecast":
        body.update(horizon=horizon or s.horizon, coverage=[0.8, 0.95])
    elif kind == "backtest":
        body.update(horizon=horizon or s.horizon, origins=3)
    return body
