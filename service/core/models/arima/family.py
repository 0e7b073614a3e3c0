"""Seasonal ARIMA with optional regressors; orders left out are searched (Hyndman & Khandakar 2008).

Estimation is exact maximum likelihood of the ARMA on the differenced series (as Box and
Jenkins, and R's ``arima``, define it); forecasts come from the undifferenced state-space
model filtered with those parameters under an exact diffuse initialisation, so the
approximate-diffuse prior never biases the estimates (tests/reference/README.md, trap 1).
The fitted object keeps only orders, parameters and data, and rebuilds the statsmodels model
when needed: a results object would pickle to megabytes.
"""

from __future__ import annotations

import math
import time
import warnings
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any, ClassVar

import numpy as np
import pandas as pd
from statsmodels.tsa.statespace.sarimax import SARIMAX

from service.core.checks import check_coverage, check_positive_int
from service.core.data.regressors import aligned_future, aligned_history
from service.core.errors import FitError, SeriesError, SpecificationError
from service.core.models.arima.estimation import css_estimate, exact_estimate
from service.core.models.arima.orders import ArimaOrders, Estimate, design_matrix, difference
from service.core.models.arima.search import EFFORTS, OrderSearchResult, search_orders
from service.core.models.base import (
    Description,
    FitWarning,
    Forecast,
    as_dict,
    future_index,
    parameter,
)
from service.core.models.intervals import normal_intervals
from service.core.models.library_warnings import unique_warnings
from service.core.models.simple import ljung_box_summary

FINAL_MAXITER = 500
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
        "Seasonal terms need at least two full seasons of data.",
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
        "order search effort: thorough (CSS screening then an exact stepwise walk, about 0.3-1 s "
        "at 200 monthly points) or quick (walk on CSS AICc, two exact fits, about 0.1-0.3 s; "
        "same orders on most reference series, AICc within a few points otherwise)",
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
        start = time.perf_counter()
        _check_series(y)
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
        _check_size(orders, values.size, len(names))
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


@dataclass
class ArimaFitted:
    """A fitted seasonal ARIMA: orders, parameters and data; the state-space model is rebuilt."""

    specification: ArimaSpec
    y: pd.Series
    seasonal_period: int
    orders: ArimaOrders
    estimate: Estimate
    regressors: pd.DataFrame | None = None
    search: OrderSearchResult | None = None
    fit_seconds: float = 0.0
    warnings: list[FitWarning] = field(default_factory=list)
    _filtered: Any = field(default=None, repr=False, compare=False)

    def __getstate__(self) -> dict[str, Any]:
        state = dict(self.__dict__)
        state["_filtered"] = None
        return state

    @property
    def regressor_names(self) -> tuple[str, ...]:
        """Names of the regressors the model was fitted with (empty without regressors)."""
        return () if self.regressors is None else tuple(str(c) for c in self.regressors.columns)

    def _model_results(self) -> Any:
        """The undifferenced model filtered at the estimates (exact diffuse start), cached."""
        if self._filtered is None:
            o = self.orders
            exog = self.regressors.to_numpy(dtype=float) if self.regressors is not None else None
            x = design_matrix(o, exog, 0, len(self.y))
            seasonal = (o.P, o.D, o.Q, o.m) if o.m > 1 else (0, 0, 0, 0)
            with warnings.catch_warnings(record=True):
                warnings.simplefilter("always")
                model = SARIMAX(
                    self.y.to_numpy(dtype=float),
                    exog=x,
                    order=(o.p, o.d, o.q),
                    seasonal_order=seasonal,
                    trend="n",
                    use_exact_diffuse=True,
                )
                params = np.r_[np.asarray(self.estimate.values, dtype=float), self.estimate.sigma2]
                # No covariance of the parameters: its numerical Hessian was half the cost.
                self._filtered = model.filter(params, cov_type="none")
        return self._filtered

    def forecast(
        self,
        horizon: int,
        coverage: Sequence[float],
        future_regressors: pd.DataFrame | np.ndarray | None = None,
    ) -> Forecast:
        """Point path and Gaussian intervals from the state-space forecast variance."""
        h = check_positive_int(horizon, "horizon")
        levels = check_coverage(coverage)
        future = None
        if self.regressors is not None:
            future = aligned_future(future_regressors, self.regressor_names, h)
        x = design_matrix(self.orders, future, len(self.y), h)
        with warnings.catch_warnings(record=True):
            warnings.simplefilter("always")
            prediction = self._model_results().get_forecast(h, exog=x)
            point = np.asarray(prediction.predicted_mean, dtype=float)
            sd = np.sqrt(np.asarray(prediction.var_pred_mean, dtype=float))
        if not (np.all(np.isfinite(point)) and np.all(np.isfinite(sd))):
            raise FitError(f"{self.orders.label} gave a non-finite forecast", field="model")
        return Forecast(future_index(self.y.index, h), point, normal_intervals(point, sd, levels))

    def fitted_values(self) -> pd.Series:
        """One-step predictions; NaN over the first d + mD steps (absorbed by the diffuse start)."""
        values = np.asarray(self._model_results().fittedvalues, dtype=float).copy()
        values[: self._burn()] = np.nan
        return pd.Series(values, index=self.y.index, name="fitted")

    def residuals(self) -> pd.Series:
        """Observed minus one-step predictions."""
        resid = self.y.to_numpy(dtype=float) - self.fitted_values().to_numpy()
        return pd.Series(resid, index=self.y.index, name="residuals")

    def _burn(self) -> int:
        return self.orders.d + self.orders.m * self.orders.D

    def refilter(self, y: pd.Series, regressors: pd.DataFrame | None = None) -> ArimaFitted:
        """The same parameters on another history (rolling origins without refitting)."""
        _check_series(y)
        if self.regressors is not None:
            if regressors is None:
                raise FitError(
                    "this model was fitted with regressors: their history is needed to re-filter",
                    field="regressors",
                )
            aligned_history(regressors, y.index)
        _check_size(self.orders, len(y), len(self.regressor_names))
        return ArimaFitted(
            self.specification,
            y,
            self.seasonal_period,
            self.orders,
            self.estimate,
            regressors if self.regressors is not None else None,
            self.search,
            0.0,
            [],
        )

    def describe(self) -> Description:
        """Box-Jenkins label, parameters by name, AIC/AICc/BIC, Ljung-Box on the residuals."""
        resid = self.residuals().to_numpy()
        resid = resid[np.isfinite(resid)]
        e = self.estimate
        criteria = {"aic": e.aic, "aicc": e.aicc, "bic": e.bic, "log_likelihood": e.loglik}
        return Description(
            family=ArimaSpec.family,
            label=self.orders.label,
            specification=as_dict(self.specification),
            parameters=e.parameters,
            information_criteria={k: v for k, v in criteria.items() if math.isfinite(v)},
            residual_variance=e.sigma2,
            residual_diagnostics=ljung_box_summary(
                resid, self.seasonal_period, model_dof=self.orders.arma_count
            ),
            observations=int(np.isfinite(self.y.to_numpy(dtype=float)).sum()),
            fit_seconds=self.fit_seconds,
        )


def _check_series(y: object) -> None:
    if not isinstance(y, pd.Series) or not isinstance(y.index, pd.DatetimeIndex):
        raise SeriesError("expected a pandas Series on a DatetimeIndex", field="series")
    if y.index.freq is None:
        raise SeriesError("the series index has no frequency", field="series")


def _check_size(orders: ArimaOrders, n: int, k_regressors: int) -> None:
    """Enough differenced observations for the coefficients (AICc needs n - k - 1 > 0)."""
    lost = orders.d + orders.m * orders.D
    k = orders.arma_count + int(orders.constant) + k_regressors + 1
    conditioning = orders.p + orders.m * orders.P
    if n - lost - max(k, conditioning) < 2:
        where = "model.seasonal_order" if orders.P or orders.Q or orders.D else "model.order"
        raise FitError(
            f"{orders.label} needs more data: {n} points, {lost} lost to differencing, "
            f"{k} parameters",
            field=where,
        )


def _final_fit(
    values: np.ndarray,
    exog: np.ndarray | None,
    names: tuple[str, ...],
    orders: ArimaOrders,
    start: Estimate | None,
    tight: bool = True,
) -> Estimate:
    """The one exact fit: warm-started, full iteration budget, tight tolerance when ``tight``.

    Without ``tight`` (the quick search) a converged exact search estimate is kept as it is:
    polishing it to the tight tolerance cost 0.02-0.4 s for log-likelihood gains < 1e-4.
    """
    if not tight and start is not None and start.method == "exact" and start.converged:
        return start
    x = design_matrix(orders, exog, 0, values.size)
    w = difference(values, orders.d, orders.D, orders.m)
    xd = None if x is None else difference(x, orders.d, orders.D, orders.m)
    if start is None:
        start = css_estimate(w, xd, orders, names)
    try:
        final = exact_estimate(
            w, xd, orders, names, start=start, maxiter=FINAL_MAXITER, tight=tight
        )
    except ArithmeticError as exc:
        raise FitError(
            f"{orders.label} could not be fitted by maximum likelihood: {exc}", field="model.order"
        ) from exc
    if start.method == "exact" and start.loglik > final.loglik:
        return start
    return final


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
