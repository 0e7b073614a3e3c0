"""The stepwise walk over (p, q, P, Q, constant) of one ARIMA order search: CSS fits to
screen, exact fits of the plausible candidates, and the table of what was tried."""

from __future__ import annotations

import math
from collections.abc import Iterable
from dataclasses import dataclass, field

import numpy as np

from service.core.errors import FitError
from service.core.models.arima.estimation import css_estimate, exact_estimate
from service.core.models.arima.orders import ArimaOrders, Estimate, design_matrix, difference

MAX_MODELS = 94
"""The most orders one walk fits (CSS or exact): the cap of Hyndman & Khandakar's stepwise
search (94 models, from memory), which bounds the search's cost on any series."""


@dataclass(frozen=True)
class CandidateScore:
    """One row of the search table: an order, its CSS AICc and (if fitted) its exact AICc."""

    label: str
    orders: ArimaOrders
    css_aicc: float
    exact_aicc: float | None


@dataclass(frozen=True)
class SearchLimits:
    """Largest orders the walk may visit (H&K defaults) and the screening settings."""

    max_p: int = 5
    max_q: int = 5
    max_P: int = 2
    max_Q: int = 2
    seasonal_lags: int = 26
    """Seasonal AR and MA orders stay within this many lags (m·P, m·Q): up to 2 for periods up
    to 13, 1 up to 26 (hourly data's 24), none beyond (weekly data's 52): the filter's state
    grows with the lags and a fit's cost steeply with it (tests/benchmarks/RESULTS.md)."""
    max_order: int = 5
    max_d: int = 2
    max_D: int = 1
    margin: float = 6.0
    finalists: int = 3
    exact_maxiter: int = 30
    screen: bool = True
    quick_finalists: int = 2


@dataclass(frozen=True)
class Bounds:
    """The lowest and highest (p, q, P, Q) the walk may visit."""

    low: tuple[int, int, int, int]
    high: tuple[int, int, int, int]


_MOVES: tuple[tuple[int, int, int, int], ...] = (
    (1, 0, 0, 0), (-1, 0, 0, 0), (0, 1, 0, 0), (0, -1, 0, 0),
    (0, 0, 1, 0), (0, 0, -1, 0), (0, 0, 0, 1), (0, 0, 0, -1),
    (1, 1, 0, 0), (-1, -1, 0, 0), (1, -1, 0, 0), (-1, 1, 0, 0),
    (0, 0, 1, 1), (0, 0, -1, -1), (0, 0, 1, -1), (0, 0, -1, 1),
)  # fmt: skip


@dataclass
class StepwiseWalk:
    """State of one search: the differenced data, the tables of CSS and exact estimates."""

    values: np.ndarray
    regressors: np.ndarray | None
    regressor_names: tuple[str, ...]
    m: int
    d: int
    D: int
    bounds: Bounds
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

    def _starts(self, starts: list[tuple[int, int, int, int]]) -> list[ArimaOrders]:
        """The walk's admissible starting orders (first constant setting); FitError if none."""
        found = [o for s in starts if (o := self.orders(s, self.constants[0])) is not None]
        if not found:
            raise FitError("no admissible order within the search limits", field="model.order")
        return found

    def css_walk(self, starts: list[tuple[int, int, int, int]]) -> None:
        """The stepwise walk on CSS AICc: move to the first better neighbour until none is."""
        best = min(self._starts(starts), key=self.css_score)
        improved = True
        while improved and len(self.css) < MAX_MODELS:
            improved = False
            for other in self.neighbours(best):
                if self.css_score(other) < self.css_score(best):
                    best, improved = other, True
                    break

    def exact_walk(self, starts: list[tuple[int, int, int, int]]) -> Estimate:
        """The unscreened stepwise walk with an exact fit of every candidate (for comparison)."""
        best = min(self._starts(starts), key=self.exact_score)
        improved = True
        while improved and len(self.exact) < MAX_MODELS:
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
