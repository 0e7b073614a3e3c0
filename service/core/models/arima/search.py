"""Stepwise seasonal ARIMA order search by AICc (Hyndman & Khandakar 2008), screened cheaply.

d and D come from unit-root and seasonal-strength tests; the stepwise walk over
(p, q, P, Q, constant) is driven by conditional-sum-of-squares fits (milliseconds each),
then the plausible candidates are fitted by exact maximum likelihood and the walk is
continued exactly around the exact winner. A candidate is dropped without an exact fit
only when its CSS AICc is worse than the CSS AICc of the exact best by more than ``margin``:
CSS is scored on one window for all orders, so its differences track the exact ones to a
few points (more when an MA root nears the unit circle).
"""

from __future__ import annotations

import time
from dataclasses import dataclass

import numpy as np
import pandas as pd

from service.core.applicability import NotApplicable
from service.core.data.filling import interpolate_gaps
from service.core.diagnostics.differencing import DifferencingOrders, orders_from
from service.core.diagnostics.seasonality import decompose
from service.core.errors import FitError, SpecificationError
from service.core.models.arima.orders import EFFORTS, ArimaOrders, Estimate, difference
from service.core.models.arima.walk import (
    Bounds,
    CandidateScore,
    SearchLimits,
    StepwiseWalk,
)
from service.core.models.base import FitWarning


@dataclass(frozen=True)
class DifferencingChoice:
    """The differencing orders chosen and why."""

    d: int
    D: int
    reason: str


@dataclass(frozen=True)
class OrderSearchResult:
    """The chosen orders, the exact estimate of the winner and the table of what was tried."""

    orders: ArimaOrders
    estimate: Estimate
    differencing: DifferencingChoice
    table: tuple[CandidateScore, ...]
    stage_seconds: dict[str, float]
    warnings: tuple[FitWarning, ...] = ()


def choose_differencing(y: np.ndarray, seasonal_period: int) -> DifferencingChoice:
    """D by seasonal strength (> 0.64), then d by successive KPSS tests (core.differencing)."""
    x = interpolate_gaps(np.asarray(y, dtype=float))
    m = seasonal_period
    decomposition = decompose(x, m) if m > 1 else NotApplicable("no seasonal period")
    return _choice(orders_from(x, m, decomposition))


def _regular_only(x: np.ndarray) -> DifferencingChoice:
    """d alone, by the same KPSS rule, on a series already seasonally differenced."""
    return _choice(orders_from(interpolate_gaps(x), 1, NotApplicable("seasonal order given")))


def _choice(found: DifferencingOrders) -> DifferencingChoice:
    reason = "; ".join(
        f"{s.series}: {s.measure} {s.value:.3f} -> {s.decision}"
        if s.value is not None
        else f"{s.series}: {s.decision}"
        for s in found.steps
    )
    return DifferencingChoice(found.regular, found.seasonal, reason or "; ".join(found.notes))


def search_orders(
    y: pd.Series | np.ndarray,
    seasonal_period: int,
    *,
    order: tuple[int, int, int] | None = None,
    seasonal_order: tuple[int, int, int] | None = None,
    fit_constant: bool | None = None,
    differences: int | None = None,
    regressors: np.ndarray | None = None,
    regressor_names: tuple[str, ...] = (),
    limits: SearchLimits | None = None,
    effort: str = "thorough",
) -> OrderSearchResult:
    """Choose a seasonal ARIMA order for ``y`` by AICc; given orders stay fixed.

    ``effort="thorough"`` screens by CSS, then walks exactly around the exact winner;
    ``"quick"`` walks on CSS AICc alone and fits only the best two CSS orders exactly
    (Hyndman & Khandakar 2008, sec. 3.2's approximation): see ``EFFORTS`` for cost and accuracy.
    ``differences`` fixes d + D where the orders leave them open (0 for a mean, 1 for a drift).
    """
    if effort not in EFFORTS:
        raise SpecificationError(
            f"search effort must be one of {list(EFFORTS)}, got {effort!r}", field="model.search"
        )
    limits = limits or SearchLimits()
    m = seasonal_period if seasonal_period > 1 else 1
    values = np.asarray(y, dtype=float)
    n = values.size
    notes: list[FitWarning] = []
    clock = time.perf_counter()
    seasonal_ok = m > 1 and n >= 2 * m + 4
    if m > 1 and not seasonal_ok and seasonal_order is None:
        notes.append(
            FitWarning(
                "seasonal_terms_skipped",
                f"fewer than two full seasons of {m} (plus a few points): "
                "seasonal orders not searched",
            )
        )
    elif seasonal_ok and seasonal_order is None and _seasonal_cap(m, limits) == 0:
        notes.append(
            FitWarning(
                "seasonal_terms_skipped",
                f"a season of {m} steps is too long for seasonal AR and MA terms (one fit "
                "can take minutes); only the seasonal difference was considered: "
                "harmonic_regression and mstl model long seasons",
            )
        )
    choice = _differencing(values, m if seasonal_ok else 1, order, seasonal_order, limits)
    if differences is not None:
        choice = _matched(choice, differences, order, seasonal_order)
    d, D = choice.d, choice.D
    stages = {"differencing": time.perf_counter() - clock}

    w = difference(values, d, D, m)
    if np.isfinite(w).sum() < 4:
        raise FitError(
            f"too few observations after differencing (d={d}, D={D}, period {m})",
            field="series.values",
        )
    constant_allowed = d + D <= 1
    if fit_constant and not constant_allowed:
        notes.append(
            FitWarning(
                "constant_dropped",
                f"no constant with d + D = {d + D}: it would imply a polynomial trend of degree 2",
            )
        )
    walk = StepwiseWalk(
        values,
        regressors,
        regressor_names,
        m,
        d,
        D,
        _bounds(order, seasonal_order, seasonal_ok, limits, m),
        _constant_options(fit_constant, constant_allowed),
        limits,
    )
    starts = _starting_points(order, seasonal_order, seasonal_ok and _seasonal_cap(m, limits) > 0)
    clock = time.perf_counter()
    if effort == "quick":
        walk.css_walk(starts)
        stages["screening"] = time.perf_counter() - clock
        clock = time.perf_counter()
        winner = walk.quick_stage()
    elif limits.screen:
        walk.css_walk(starts)
        stages["screening"] = time.perf_counter() - clock
        clock = time.perf_counter()
        winner = walk.exact_stage()
    else:
        winner = walk.exact_walk(starts)
    stages["exact"] = time.perf_counter() - clock
    return OrderSearchResult(
        winner.orders, winner, choice, walk.table(), stages, tuple(notes) + winner.warnings
    )


def _differencing(
    values: np.ndarray,
    m: int,
    order: tuple[int, int, int] | None,
    seasonal_order: tuple[int, int, int] | None,
    limits: SearchLimits,
) -> DifferencingChoice:
    if order is not None and (seasonal_order is not None or m == 1):
        D = seasonal_order[1] if seasonal_order is not None else 0
        return DifferencingChoice(order[1], D, "given")
    chosen = choose_differencing(values, m)
    D = seasonal_order[1] if seasonal_order is not None else min(chosen.D, limits.max_D)
    if m == 1:
        D = 0
    if order is not None:
        return DifferencingChoice(order[1], D, chosen.reason + "; d given")
    if seasonal_order is not None or D != chosen.D:
        # d depends on D: retest on the series differenced the way it will be.
        again = _regular_only(difference(values, 0, D, m))
        return DifferencingChoice(min(again.d, limits.max_d), D, again.reason)
    return DifferencingChoice(min(chosen.d, limits.max_d), D, chosen.reason)


def _matched(
    choice: DifferencingChoice,
    total: int,
    order: tuple[int, int, int] | None,
    seasonal_order: tuple[int, int, int] | None,
) -> DifferencingChoice:
    """d and D adjusted to sum to ``total`` (the constant's), keeping any order given and
    preferring the seasonal difference the tests chose."""
    if choice.d + choice.D == total:
        return choice
    if seasonal_order is not None:
        D = seasonal_order[1]
        d = total - D
    elif order is not None:
        d = order[1]
        D = total - d
    else:
        D = min(choice.D, total)
        d = total - D
    return DifferencingChoice(d, D, f"d + D = {total}, as the constant asks")


def _seasonal_cap(m: int, limits: SearchLimits) -> int:
    """The largest seasonal AR or MA order searched at period ``m`` (``seasonal_lags``)."""
    return limits.seasonal_lags // m if m > 1 else 0


def _bounds(
    order: tuple[int, int, int] | None,
    seasonal_order: tuple[int, int, int] | None,
    seasonal_ok: bool,
    limits: SearchLimits,
    m: int,
) -> Bounds:
    cap = _seasonal_cap(m, limits)
    lo = [0, 0, 0, 0]
    hi = [limits.max_p, limits.max_q, limits.max_P, limits.max_Q]
    if order is not None:
        lo[0] = hi[0] = order[0]
        lo[1] = hi[1] = order[2]
    if seasonal_order is not None:
        lo[2] = hi[2] = seasonal_order[0]
        lo[3] = hi[3] = seasonal_order[2]
    elif not seasonal_ok:
        hi[2] = hi[3] = 0
    else:
        hi[2] = min(hi[2], cap)
        hi[3] = min(hi[3], cap)
    return Bounds((lo[0], lo[1], lo[2], lo[3]), (hi[0], hi[1], hi[2], hi[3]))


def _constant_options(fit_constant: bool | None, allowed: bool) -> tuple[bool, ...]:
    if not allowed or fit_constant is False:
        return (False,)
    if fit_constant:
        return (True,)
    return (True, False)


def _starting_points(
    order: tuple[int, int, int] | None,
    seasonal_order: tuple[int, int, int] | None,
    seasonal_terms: bool,
) -> list[tuple[int, int, int, int]]:
    """H&K's four initial models (seasonal parts only where seasonal terms are searched)."""
    s = 1 if seasonal_terms else 0
    points = [(2, 2, s, s), (0, 0, 0, 0), (1, 0, s, 0), (0, 1, 0, s)]
    out = []
    for p, q, P, Q in points:
        if order is not None:
            p, q = order[0], order[2]
        if seasonal_order is not None:
            P, Q = seasonal_order[0], seasonal_order[2]
        out.append((p, q, P, Q))
    return out
