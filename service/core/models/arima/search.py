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

import math
import time
from collections.abc import Iterable
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from service.core.applicability import NotApplicable
from service.core.diagnostics.differencing import DifferencingOrders, orders_from
from service.core.diagnostics.seasonality import decompose
from service.core.errors import FitError, SpecificationError
from service.core.models.arima.estimation import (
    ArimaOrders,
    Estimate,
    css_estimate,
    design_matrix,
    difference,
    exact_estimate,
)
from service.core.models.base import FitWarning

EFFORTS: dict[str, str] = {
    "thorough": "CSS-screened stepwise walk, then an exact walk around the exact winner",
    "quick": "stepwise walk on CSS AICc, exact fits of the two best CSS orders only",
}


@dataclass(frozen=True)
class DifferencingChoice:
    """The differencing orders chosen and why."""

    d: int
    D: int
    reason: str


@dataclass(frozen=True)
class CandidateScore:
    """One row of the search table: an order, its CSS AICc and (if fitted) its exact AICc."""

    label: str
    orders: ArimaOrders
    css_aicc: float
    exact_aicc: float | None


@dataclass(frozen=True)
class OrderSearchResult:
    """The chosen orders, the exact estimate of the winner and the table of what was tried."""

    orders: ArimaOrders
    estimate: Estimate
    differencing: DifferencingChoice
    table: tuple[CandidateScore, ...]
    stage_seconds: dict[str, float]
    warnings: tuple[FitWarning, ...] = ()


@dataclass(frozen=True)
class SearchLimits:
    """Largest orders the walk may visit (H&K defaults) and the screening settings."""

    max_p: int = 5
    max_q: int = 5
    max_P: int = 2
    max_Q: int = 2
    max_order: int = 5
    max_d: int = 2
    max_D: int = 1
    margin: float = 6.0
    finalists: int = 3
    exact_maxiter: int = 30
    screen: bool = True
    quick_finalists: int = 2


def choose_differencing(y: np.ndarray, seasonal_period: int) -> DifferencingChoice:
    """D by seasonal strength (> 0.64), then d by successive KPSS tests (core.differencing)."""
    x = _interpolated(np.asarray(y, dtype=float))
    m = seasonal_period
    decomposition = decompose(x, m) if m > 1 else NotApplicable("no seasonal period")
    return _choice(orders_from(x, m, decomposition))


def _regular_only(x: np.ndarray) -> DifferencingChoice:
    """d alone, by the same KPSS rule, on a series already seasonally differenced."""
    return _choice(orders_from(_interpolated(x), 1, NotApplicable("seasonal order given")))


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
    walk = _Walk(
        values,
        regressors,
        regressor_names,
        m,
        d,
        D,
        _bounds(order, seasonal_order, seasonal_ok, limits),
        _constant_options(fit_constant, constant_allowed),
        limits,
    )
    starts = _starting_points(order, seasonal_order, seasonal_ok, m)
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


@dataclass(frozen=True)
class _Bounds:
    low: tuple[int, int, int, int]
    high: tuple[int, int, int, int]


def _bounds(
    order: tuple[int, int, int] | None,
    seasonal_order: tuple[int, int, int] | None,
    seasonal_ok: bool,
    limits: SearchLimits,
) -> _Bounds:
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
    return _Bounds((lo[0], lo[1], lo[2], lo[3]), (hi[0], hi[1], hi[2], hi[3]))


def _constant_options(fit_constant: bool | None, allowed: bool) -> tuple[bool, ...]:
    if not allowed or fit_constant is False:
        return (False,)
    if fit_constant:
        return (True,)
    return (True, False)


def _starting_points(
    order: tuple[int, int, int] | None,
    seasonal_order: tuple[int, int, int] | None,
    seasonal_ok: bool,
    m: int,
) -> list[tuple[int, int, int, int]]:
    """H&K's four initial models (seasonal parts only when there is a season)."""
    s = 1 if seasonal_ok and m > 1 else 0
    points = [(2, 2, s, s), (0, 0, 0, 0), (1, 0, s, 0), (0, 1, 0, s)]
    out = []
    for p, q, P, Q in points:
        if order is not None:
            p, q = order[0], order[2]
        if seasonal_order is not None:
            P, Q = seasonal_order[0], seasonal_order[2]
        out.append((p, q, P, Q))
    return out


_MOVES: tuple[tuple[int, int, int, int], ...] = (
    (1, 0, 0, 0), (-1, 0, 0, 0), (0, 1, 0, 0), (0, -1, 0, 0),
    (0, 0, 1, 0), (0, 0, -1, 0), (0, 0, 0, 1), (0, 0, 0, -1),
    (1, 1, 0, 0), (-1, -1, 0, 0), (1, -1, 0, 0), (-1, 1, 0, 0),
    (0, 0, 1, 1), (0, 0, -1, -1), (0, 0, 1, -1), (0, 0, -1, 1),
)  # fmt: skip


@dataclass
class _Walk:
    """State of one search: the differenced data, the tables of CSS and exact estimates."""

    values: np.ndarray
    regressors: np.ndarray | None
    regressor_names: tuple[str, ...]
    m: int
    d: int
    D: int
    bounds: _Bounds
    constants: tuple[bool, ...]
    limits: SearchLimits
    css: dict[ArimaOrders, Estimate] = field(default_factory=dict)
    exact: dict[ArimaOrders, Estimate | None] = field(default_factory=dict)

    def orders(self, point: tuple[int, int, int, int], constant: bool) -> ArimaOrders | None:
        p, q, P, Q = point
        lo, hi = self.bounds.low, self.bounds.high
        if not all(lo[i] <= point[i] <= hi[i] for i in range(4)):
            return None
        if p + q + P + Q > max(self.limits.max_order, sum(lo)):
            return None
        return ArimaOrders(p, self.d, q, P, self.D, Q, self.m, constant)

    def _design(self, orders: ArimaOrders) -> np.ndarray | None:
        x = design_matrix(orders, self.regressors, 0, self.values.size)
        return None if x is None else difference(x, self.d, self.D, self.m)

    def _score_from(self) -> int:
        """One scoring window for every CSS fit: after the largest conditioning in the bounds,
        kept to at most a third of the differenced series."""
        hi = self.bounds.high
        largest = hi[0] + self.m * hi[2]
        return min(largest, (self.values.size - self.d - self.m * self.D) // 3)

    def _w(self) -> np.ndarray:
        return difference(self.values, self.d, self.D, self.m)

    def css_score(self, orders: ArimaOrders) -> float:
        if orders not in self.css:
            self.css[orders] = css_estimate(
                self._w(), self._design(orders), orders, self.regressor_names, self._score_from()
            )
        return self.css[orders].aicc

    def exact_score(self, orders: ArimaOrders) -> float:
        if orders not in self.exact:
            try:
                self.exact[orders] = exact_estimate(
                    self._w(),
                    self._design(orders),
                    orders,
                    self.regressor_names,
                    start=self.css.get(orders),
                    maxiter=self.limits.exact_maxiter,
                )
            except ArithmeticError:
                self.exact[orders] = None
        found = self.exact[orders]
        return found.aicc if found is not None else math.inf

    def neighbours(self, orders: ArimaOrders) -> Iterable[ArimaOrders]:
        here = (orders.p, orders.q, orders.P, orders.Q)
        for move in _MOVES:
            point = (here[0] + move[0], here[1] + move[1], here[2] + move[2], here[3] + move[3])
            found = self.orders(point, orders.constant)
            if found is not None:
                yield found
        for constant in self.constants:
            if constant != orders.constant:
                yield orders.with_constant(constant)

    def css_walk(self, starts: list[tuple[int, int, int, int]]) -> None:
        """The stepwise walk on CSS AICc: move to the first better neighbour until none is."""
        candidates = [o for s in starts if (o := self.orders(s, self.constants[0])) is not None]
        if not candidates:
            raise FitError("no admissible order within the search limits", field="model.order")
        best = min(candidates, key=self.css_score)
        improved = True
        while improved and len(self.css) < 94:
            improved = False
            for other in self.neighbours(best):
                if self.css_score(other) < self.css_score(best):
                    best, improved = other, True
                    break

    def exact_walk(self, starts: list[tuple[int, int, int, int]]) -> Estimate:
        """The unscreened stepwise walk with an exact fit of every candidate (for comparison)."""
        candidates = [o for s in starts if (o := self.orders(s, self.constants[0])) is not None]
        if not candidates:
            raise FitError("no admissible order within the search limits", field="model.order")
        best = min(candidates, key=self.exact_score)
        improved = True
        while improved and len(self.exact) < 94:
            improved = False
            for other in self.neighbours(best):
                self.css_score(other)
                if self.exact_score(other) < self.exact_score(best):
                    best, improved = other, True
                    break
        return self._winner(best)

    def exact_stage(self) -> Estimate:
        """Exact fits of the CSS finalists, then the exact walk around the exact winner."""
        ranked = sorted(self.css, key=lambda o: self.css[o].aicc)
        top = self.css[ranked[0]].aicc
        plausible = [o for o in ranked if self.css[o].aicc <= top + self.limits.margin]
        for orders in plausible[: self.limits.finalists]:
            self.exact_score(orders)
        best = min(self.exact, key=self.exact_score)
        improved = True
        while improved:
            improved = False
            for other in self.neighbours(best):
                # Dominated: CSS puts it far behind the exact best; skip the exact fit.
                if self.css_score(other) > self.css_score(best) + self.limits.margin:
                    continue
                if self.exact_score(other) < self.exact_score(best):
                    best, improved = other, True
                    break
        return self._winner(best)

    def quick_stage(self) -> Estimate:
        """Exact fits of the best CSS orders only (a few ms each); the lowest exact AICc wins."""
        ranked = sorted(self.css, key=lambda o: self.css[o].aicc)
        for orders in ranked[: self.limits.quick_finalists]:
            self.exact_score(orders)
        fitted = [o for o, est in self.exact.items() if est is not None]
        if not fitted:
            # Both finalists failed: fall back to the exact walk's safety net, one at a time.
            for orders in ranked[self.limits.quick_finalists :]:
                if math.isfinite(self.exact_score(orders)):
                    fitted = [orders]
                    break
        return self._winner(min(fitted, key=self.exact_score) if fitted else ranked[0])

    def _winner(self, best: ArimaOrders) -> Estimate:
        winner = self.exact.get(best)
        if winner is None:
            raise FitError(
                "every candidate order failed to fit by maximum likelihood", field="model.order"
            )
        return winner

    def table(self) -> tuple[CandidateScore, ...]:
        rows = []
        for orders, est in sorted(self.css.items(), key=lambda kv: kv[1].aicc):
            exact = self.exact.get(orders)
            rows.append(
                CandidateScore(
                    orders.label, orders, est.aicc, exact.aicc if exact is not None else None
                )
            )
        return tuple(rows)


def _interpolated(x: np.ndarray) -> np.ndarray:
    bad = ~np.isfinite(x)
    if not bad.any():
        return x
    idx = np.arange(x.size)
    out = x.copy()
    out[bad] = np.interp(idx[bad], idx[~bad], x[~bad])
    return out
