"""Forecasts that respect a lower bound: counts and other non-negative data never go below zero.

Method: censoring at the bound. The predictive distribution's mass below the bound is put on
the bound, so every quantile below it becomes the bound: the point (a median or a mean that
is below the bound) and each interval limit are raised to max(value, bound); nothing above the
bound changes. For a quantity that cannot fall below the bound, the raised interval holds
every outcome the original one held, so its coverage is kept.

Which bound: 0 when every observed value is >= 0 (the default), none otherwise; a request may
set a number or turn it off with null. Croston's method (intermittent demand) keeps its own
floor at zero on every path, whatever the request says.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np

from service.core.errors import RequestError
from service.core.models.base import Forecast
from service.core.models.intervals import Interval

METHOD = "censored at the bound: points and interval limits below it are raised to it"
FLOORED_FAMILIES = frozenset({"croston"})


@dataclass(frozen=True)
class LowerBound:
    """The bound to apply (None: none) and why it is the one."""

    value: float | None
    reason: str


@dataclass(frozen=True)
class BoundReport:
    """What the bound did to a forecast, for the response."""

    value: float
    method: str
    reason: str
    raised: int


def resolve_lower_bound(values: np.ndarray, requested: float | None, given: bool) -> LowerBound:
    """The request's bound when ``given`` (None turns it off), else 0 for non-negative history."""
    if given:
        if requested is None:
            return LowerBound(None, "turned off by the request")
        if isinstance(requested, bool) or not isinstance(requested, (int, float)):
            raise RequestError("lower_bound must be a number or null", field="lower_bound")
        if not math.isfinite(requested):
            raise RequestError("lower_bound must be finite", field="lower_bound")
        return LowerBound(float(requested), "set by the request")
    finite = values[np.isfinite(values)]
    if finite.size and bool(np.all(finite >= 0)):
        return LowerBound(0.0, "every observed value is >= 0")
    return LowerBound(None, "the history has negative values")


def with_family_floor(bound: LowerBound, families: set[str]) -> LowerBound:
    """Croston's forecasts are never negative: keep a floor at 0 whatever the request says."""
    if not families & FLOORED_FAMILIES:
        return bound
    if bound.value is not None and bound.value >= 0:
        return bound
    return LowerBound(0.0, "Croston's method never forecasts below zero")


def apply_lower_bound(forecast: Forecast, bound: LowerBound) -> tuple[Forecast, BoundReport | None]:
    """The forecast censored at the bound, and a report (None when there is no bound)."""
    if bound.value is None:
        return forecast, None
    b = bound.value
    raised = int(np.sum(forecast.point < b))
    intervals = []
    for i in forecast.intervals:
        raised += int(np.sum(i.lower < b) + np.sum(i.upper < b))
        intervals.append(Interval(i.coverage, np.maximum(i.lower, b), np.maximum(i.upper, b)))
    point = np.maximum(forecast.point, b)
    report = BoundReport(b, METHOD, bound.reason, raised)
    return Forecast(forecast.index, point, tuple(intervals)), report


def families_in(specification: Any) -> set[str]:
    """Every family named in a specification's JSON form, nested ones included."""
    found: set[str] = set()
    stack = [specification]
    while stack:
        item = stack.pop()
        if isinstance(item, dict):
            if isinstance(item.get("family"), str):
                found.add(item["family"])
            stack.extend(item.values())
        elif isinstance(item, list):
            stack.extend(item)
    return found
