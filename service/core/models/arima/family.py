"""Seasonal ARIMA with optional regressors; orders left out are searched (Hyndman & Khandakar 2008).

Estimation is exact maximum likelihood of the ARMA on the differenced series (as Box and
Jenkins define it), so the approximate-diffuse prior of the state-space filter never biases
the estimates (tests/reference/README.md, trap 1); the fitted model is in ``fitted.py``.
"""

from __future__ import annotations

import math
import time
from collections.abc import Mapping
from dataclasses import dataclass
from typing import TYPE_CHECKING, ClassVar

import numpy as np
import pandas as pd

from service.core.checks import check_positive_int
from service.core.data.regressors import aligned_history
from service.core.errors import FitError, SpecificationError
from service.core.models.arima.orders import (
    EFFORTS,
    ArimaOrders,
    Estimate,
    design_matrix,
    difference,
)
from service.core.models.base import (
    FitWarning,
    parameter,
)
from service.core.models.library_warnings import unique_warnings

# The implementation (statsmodels) loads in fit: the HTTP server imports this module for the
# catalogue and the specifications only (DEVELOPERS.md, after the layout).
if TYPE_CHECKING:
    from service.core.models.arima.fitted import ArimaFitted
    from service.core.models.arima.search import OrderSearchResult

FINAL_MAXITER = 500
SECOND_START_ORDER = 4
"""Final fits with p + q at least this also start from zero ARMA coefficients (the project's
dense likelihood) or the state-space model's own start, and keep the higher likelihood: from
the CSS start alone such fits stopped in a local optimum (issue 13)."""
CONSTANTS = ("auto", "none", "mean", "drift")
_DIFFERENCES = {"mean": 0, "drift": 1}
"""The total differencing d + D that each named constant stands for."""


@dataclass(frozen=True)
class ArimaSpec:
    """ARIMA(p,d,q)x(P,D,Q)m; null orders are chosen by a stepwise AICc search."""

    family: ClassVar[str] = "arima"
    summary: ClassVar[str] = (
        "Seasonal ARIMA (Box and Jenkins) by exact maximum likelihood, with optional "
        "regressors; orders left out are chosen by a stepwise AICc search."
    )
    constraints: ClassVar[tuple[str, ...]] = (
        "order and seasonal_order are [p, d, q] and [P, D, Q]; the seasonal period is the "
        "series' seasonal_period.",
        "Orders left out (null) are searched: d and D by KPSS tests and seasonal strength, "
        "then p, q, P, Q stepwise by AICc (p, q <= 5, P, Q <= 2, p + q + P + Q <= 5).",
        "constant: auto (searched with searched orders; a mean for fixed orders without "
        "differencing), none, mean (d + D = 0) or drift (d + D = 1); differencing left to the "
        "search is set to match mean or drift. No constant when d + D >= 2.",
        "Seasonal terms need at least two full seasons of data. Searched seasonal AR and MA "
        "orders span at most 26 lags (P, Q <= 1 for a period of 14 to 26, none above: only "
        "the seasonal difference); a seasonal_order given is kept.",
    )

    renamed: ClassVar[Mapping[str, str]] = {"include_constant": "constant"}
    """Former parameter names: the registry refuses them naming the new one."""

    order: tuple[int, ...] | None = parameter(
        None, "[p, d, q]; null to search", kind="integers", minimum=0, maximum=10
    )
    seasonal_order: tuple[int, ...] | None = parameter(
        None, "[P, D, Q]; null to search", kind="integers", minimum=0, maximum=3
    )
    constant: str = parameter(
        "auto",
        "auto (searched when orders are searched, a mean for fixed orders without differencing), "
        "none, mean (needs d + D = 0) or drift (needs d + D = 1)",
        kind="choice",
        allowed=CONSTANTS,
    )
    search: str = parameter(
        "thorough",
        "order search effort: thorough (CSS screening then an exact stepwise walk) or quick "
        "(walk on CSS AICc, two exact fits: faster, the same orders on most series)",
        kind="choice",
        allowed=tuple(EFFORTS),
    )

    def __post_init__(self) -> None:
        if self.constant not in CONSTANTS:
            raise SpecificationError(
                f"constant must be one of {', '.join(CONSTANTS)}, got {self.constant!r}",
                field="model.constant",
            )
        if self.search not in EFFORTS:
            raise SpecificationError(
                f"search must be one of {list(EFFORTS)}, got {self.search!r}",
                field="model.search",
            )
        for name in ("order", "seasonal_order"):
            value = getattr(self, name)
            if value is not None and len(value) != 3:
                raise SpecificationError(
                    f"{name} must have three whole numbers, got {list(value)}",
                    field=f"model.{name}",
                )

    def fit(
        self,
        y: pd.Series,
        seasonal_period: int = 1,
        regressors: pd.DataFrame | None = None,
    ) -> ArimaFitted:
        """Fit on a regular series; ``regressors`` (same index as ``y``) enter as a regression."""
        from service.core.models.arima.fitted import ArimaFitted, check_series, check_size

        start = time.perf_counter()
        check_series(y)
        m = check_positive_int(seasonal_period, "series.seasonal_period")
        exog = aligned_history(regressors, y.index) if regressors is not None else None
        names = tuple(str(c) for c in regressors.columns) if regressors is not None else ()
        values = y.to_numpy(dtype=float)
        self._check_seasonal(values.size, m)
        self._check_constant()
        fixed = self._fixed_orders(m)
        search: OrderSearchResult | None = None
        notes: list[FitWarning] = []
        if fixed is None:
            search = self._search(values, m, exog, names)
            orders, start_estimate = search.orders, search.estimate
            notes.extend(search.warnings)
        else:
            orders, start_estimate = fixed, None
        check_size(orders, values.size, len(names))
        estimate = _final_fit(
            values, exog, names, orders, start_estimate, tight=self.search == "thorough"
        )
        notes.extend(_estimate_warnings(estimate))
        return ArimaFitted(
            specification=self,
            y=y,
            seasonal_period=m,
            orders=orders,
            estimate=estimate,
            regressors=regressors,
            search=search,
            fit_seconds=time.perf_counter() - start,
            warnings=unique_warnings(notes),
        )

    def _check_constant(self) -> None:
        """A named constant fixes d + D: 0 for a mean, 1 for a drift."""
        want = _DIFFERENCES.get(self.constant)
        given = [o[1] for o in (self.order, self.seasonal_order) if o is not None]
        if want is not None and any(g > want for g in given):
            raise _constant_mismatch(self.constant, want, sum(given))

    def _check_seasonal(self, n: int, m: int) -> None:
        if self.seasonal_order is None or not any(self.seasonal_order):
            return
        if m == 1:
            raise FitError(
                "seasonal terms need a seasonal period > 1 on the series",
                field="model.seasonal_order",
            )
        if n < 2 * m:
            raise FitError(
                f"seasonal terms need at least two full seasons ({2 * m} points), got {n}",
                field="model.seasonal_order",
            )

    def _fixed_orders(self, m: int) -> ArimaOrders | None:
        """The orders when nothing is left to search, else None."""
        if self.order is None or (self.seasonal_order is None and m > 1):
            return None
        p, d, q = self.order
        P, D, Q = self.seasonal_order if self.seasonal_order is not None else (0, 0, 0)
        if not (P or D or Q):
            m = 1
        if self.constant == "auto":
            return ArimaOrders(p, d, q, P, D, Q, m, d + D == 0)
        want = _DIFFERENCES.get(self.constant)
        if want is not None and d + D != want:
            raise _constant_mismatch(self.constant, want, d + D)
        return ArimaOrders(p, d, q, P, D, Q, m, self.constant != "none")

    def _search(
        self, values: np.ndarray, m: int, exog: np.ndarray | None, names: tuple[str, ...]
    ) -> OrderSearchResult:
        from service.core.models.arima.search import search_orders

        order = tuple(self.order) if self.order is not None else None
        seasonal = tuple(self.seasonal_order) if self.seasonal_order is not None else None
        return search_orders(
            values,
            m,
            order=order,  # type: ignore[arg-type]
            seasonal_order=seasonal,  # type: ignore[arg-type]
            fit_constant=None if self.constant == "auto" else self.constant != "none",
            differences=_DIFFERENCES.get(self.constant),
            regressors=exog,
            regressor_names=names,
            effort=self.search,
        )


def _constant_mismatch(constant: str, want: int, got: int) -> SpecificationError:
    return SpecificationError(
        f"constant {constant!r} needs d + D = {want}; the orders give {got}",
        field="model.constant",
    )


def _final_fit(
    values: np.ndarray,
    exog: np.ndarray | None,
    names: tuple[str, ...],
    orders: ArimaOrders,
    start: Estimate | None,
    tight: bool = True,
) -> Estimate:
    """The final exact fit: warm-started, full iteration budget, tight tolerance when ``tight``;
    with p + q >= SECOND_START_ORDER also from a second start, the higher likelihood kept.

    Without ``tight`` (the quick search) a converged exact search estimate is kept as it is:
    polishing it to the tight tolerance bought negligible likelihood (RESULTS.md).
    """
    from service.core.models.arima.estimation import css_estimate, exact_estimate

    second = orders.p + orders.q >= SECOND_START_ORDER
    if not tight and start is not None and start.method == "exact" and start.converged:
        if not second:
            return start
    x = design_matrix(orders, exog, 0, values.size)
    w = difference(values, orders.d, orders.D, orders.m)
    xd = None if x is None else difference(x, orders.d, orders.D, orders.m)
    if start is None:
        start = css_estimate(w, xd, orders, names)
    found: list[Estimate] = []
    skip_first = not tight and start.method == "exact" and start.converged
    starts = ([] if skip_first else [start]) + ([None] if second else [])
    failure: ArithmeticError | None = None
    for begin in starts:
        try:
            found.append(
                exact_estimate(
                    w, xd, orders, names, start=begin, maxiter=FINAL_MAXITER, tight=tight
                )
            )
        except ArithmeticError as exc:
            failure = failure or exc
    found += [start] if start.method == "exact" else []
    if not found:
        raise FitError(
            f"{orders.label} could not be fitted by maximum likelihood: {failure}",
            field="model.order",
        ) from failure
    return max(found, key=lambda e: e.loglik if math.isfinite(e.loglik) else -math.inf)


def _estimate_warnings(estimate: Estimate) -> list[FitWarning]:
    out = list(estimate.warnings)
    if not estimate.converged:
        out.append(
            FitWarning(
                "not_converged",
                f"{estimate.orders.label}: the likelihood optimiser stopped before converging "
                f"({estimate.iterations} iterations); estimates may be imprecise",
            )
        )
    return out
