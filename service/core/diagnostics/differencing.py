"""How many regular (d) and seasonal (D) differences a series needs before ARIMA modelling.

D first, then d on the seasonally differenced series, as Hyndman & Khandakar (2008) order
them: D = 1 when the STL seasonal strength exceeds 0.64, d by successive KPSS tests.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from service.core.applicability import NotApplicable
from service.core.checks import check_positive_int
from service.core.data.filling import check_series, fill_gaps
from service.core.diagnostics.random_walk import RandomWalkVerdict
from service.core.diagnostics.seasonality import Decomposition, decompose, seasonal_strength
from service.core.diagnostics.stationarity import (
    Bandwidth,
    HypothesisTest,
    adf_test,
    applicability,
    kpss_test,
)
from service.core.diagnostics.unit_root import UnitRootDecision, integration_order

SEASONAL_THRESHOLD = 0.64
MAX_REGULAR = 2
DIFFERENCING_BANDWIDTH: Bandwidth = "short"
"""The KPSS bandwidth of the d search, chosen on the development data (tests/benchmarks/
RESULTS.md)."""
REGULAR_RULE = (
    "d is the number of successive KPSS (level) tests at 5 % that reject stationarity, each "
    "on the previous difference and after any seasonal difference, at most 2 (Hyndman & "
    "Khandakar 2008)."
)
STORY_REGULAR_RULE = (
    "d is 0 for a stationary or slowly mean-reverting series and for a seasonal random walk, "
    "1 for a random walk, and otherwise 1, or 2 when ADF with a constant keeps a unit root in "
    "the differences at 5 % (Dickey & Fuller 1979), by KPSS tests after a seasonal difference "
    "(Hyndman & Khandakar 2008)."
)
SEASONAL_RULE = (
    "D = 1 when there are two full seasons and the STL seasonal strength "
    "max(0, 1 - Var(R)/Var(S + R)) exceeds 0.64 (Wang, Smith & Hyndman 2006)."
)


@dataclass(frozen=True)
class DifferencingStep:
    """One decision of the search: the series looked at, the measure and what it decided."""

    series: str
    measure: str
    value: float | None
    p_value: float | None
    p_value_bound: str | None
    decision: str


@dataclass(frozen=True)
class DifferencingOrders:
    """d and D with the steps that chose them and the tests re-run on the differenced series."""

    regular: int
    seasonal: int
    seasonal_period: int
    steps: tuple[DifferencingStep, ...]
    adf_after: HypothesisTest | NotApplicable
    kpss_after: HypothesisTest | NotApplicable
    notes: tuple[str, ...]
    regular_rule: str = REGULAR_RULE

    @property
    def stationary_after(self) -> bool | None:
        """Whether ADF rejects and KPSS does not on the differenced series (None if untestable)."""
        adf, kpss = self.adf_after, self.kpss_after
        if isinstance(adf, HypothesisTest) and isinstance(kpss, HypothesisTest):
            return adf.rejects and not kpss.rejects
        return None


def differencing_orders(y: pd.Series, seasonal_period: int) -> DifferencingOrders:
    """d (0-2) and D (0-1) for ARIMA; missing values are interpolated for the tests."""
    check_series(y)
    check_positive_int(seasonal_period, "series.seasonal_period")
    filled = fill_gaps(y)
    x = filled.values
    decomposition: Decomposition | NotApplicable
    if x.size == 0:
        decomposition = NotApplicable("the series has no observed values")
    elif not np.any(x != x[0]):
        decomposition = NotApplicable("the series is constant")
    else:
        decomposition = decompose(x, seasonal_period)
    return orders_from(x, seasonal_period, decomposition, filled.note())


def orders_from(
    x: np.ndarray,
    seasonal_period: int,
    decomposition: Decomposition | NotApplicable,
    notes: tuple[str, ...] = (),
) -> DifferencingOrders:
    """The search on a gap-free series whose decomposition is already at hand."""
    steps: list[DifferencingStep] = []
    seasonal = 0
    strength = (
        seasonal_strength(decomposition) if isinstance(decomposition, Decomposition) else None
    )
    if strength is not None:
        seasonal = int(strength > SEASONAL_THRESHOLD)
        decision = "seasonal difference" if seasonal else "no seasonal difference"
        steps.append(DifferencingStep("y", "seasonal_strength", strength, None, None, decision))
    else:
        reason = (
            decomposition.seasonal_reason
            if isinstance(decomposition, Decomposition)
            else decomposition.reason
        )
        notes = (*notes, f"D = 0: {reason}")
    current = difference(x, 0, seasonal, seasonal_period)
    regular = 0
    while True:
        name = label(regular, seasonal, seasonal_period)
        blocked = applicability(current)
        if blocked is not None:
            notes = (*notes, f"d search stopped at {name}: {blocked.reason}")
            break
        test = kpss_test(current, "c", DIFFERENCING_BANDWIDTH)
        if isinstance(test, NotApplicable):
            notes = (*notes, f"d search stopped at {name}: {test.reason}")
            break
        more = test.rejects and regular < MAX_REGULAR
        decision = "difference" if more else "stop"
        if test.rejects and regular == MAX_REGULAR:
            decision = "stop (at most two regular differences)"
        steps.append(
            DifferencingStep(
                name, "kpss_level", test.statistic, test.p_value, test.p_value_bound, decision
            )
        )
        if not more:
            break
        regular += 1
        current = np.diff(current)
    return DifferencingOrders(
        regular=regular,
        seasonal=seasonal,
        seasonal_period=seasonal_period,
        steps=tuple(steps),
        adf_after=adf_test(current, "c"),
        kpss_after=kpss_test(current, "c", DIFFERENCING_BANDWIDTH),
        notes=notes,
    )


def difference(x: np.ndarray, regular: int, seasonal: int, seasonal_period: int) -> np.ndarray:
    """Apply D seasonal differences at lag m, then d regular ones."""
    out = x
    for _ in range(seasonal):
        out = out[seasonal_period:] - out[:-seasonal_period]
    for _ in range(regular):
        out = np.diff(out)
    return out


def label(regular: int, seasonal: int, seasonal_period: int) -> str:
    """The differenced series in operator notation: y, Δy, Δ²y, Δ12 y, ΔΔ12 y."""
    parts = []
    if regular == 1:
        parts.append("Δ")
    elif regular == 2:
        parts.append("Δ²")
    if seasonal:
        parts.append(f"Δ{seasonal_period} ")
    return "".join(parts) + "y"


def story_orders(
    x: np.ndarray,
    seasonal_period: int,
    decomposition: Decomposition | NotApplicable,
    notes: tuple[str, ...],
    decision: UnitRootDecision | NotApplicable,
    walk: RandomWalkVerdict | NotApplicable,
) -> DifferencingOrders:
    """The orders the diagnostics report: the same story as the unit-root decision and the
    random-walk verdict; the KPSS search (``orders_from``) where those leave d open."""
    searched = orders_from(x, seasonal_period, decomposition, notes)
    if isinstance(decision, NotApplicable):
        return searched
    m = seasonal_period
    seasonal, regular = searched.seasonal, searched.regular
    why: str
    if isinstance(walk, RandomWalkVerdict) and walk.is_seasonal_random_walk:
        seasonal, regular, why = 1, 0, "seasonal random walk: one seasonal difference is white"
    elif isinstance(walk, RandomWalkVerdict) and walk.is_random_walk:
        seasonal = 0
        regular = 1 if decision.unit_root else 0
        why = "random walk: one difference is white" if regular else "slowly mean-reverting"
    elif not decision.unit_root:
        regular, why = 0, f"{decision.verdict}: no regular difference"
    elif seasonal:
        regular = searched.regular
        why = "unit root and a seasonal difference: the KPSS search decides d"
    else:
        known = walk.differences if isinstance(walk, RandomWalkVerdict) else None
        regular = known if known is not None else integration_order(np.diff(x))
        why = f"unit root: {regular} regular difference(s)"
    steps = (
        *searched.steps,
        DifferencingStep(label(regular, seasonal, m), "unit_root_procedure", None, None, None, why),
    )
    adf_after, kpss_after = searched.adf_after, searched.kpss_after
    if (regular, seasonal) != (searched.regular, searched.seasonal):
        current = difference(x, regular, seasonal, m)
        adf_after, kpss_after = adf_test(current, "c"), kpss_test(current, "c")
    return DifferencingOrders(
        regular=regular,
        seasonal=seasonal,
        seasonal_period=m,
        steps=steps,
        adf_after=adf_after,
        kpss_after=kpss_after,
        notes=searched.notes,
        regular_rule=STORY_REGULAR_RULE,
    )
