"""A fitted seasonal ARIMA: orders, parameters and data, and the state-space model rebuilt from
them to forecast, re-filter and describe (a results object would pickle to megabytes).

Forecasts come from the undifferenced model filtered at the estimates under an exact diffuse
initialisation (tests/reference/README.md, trap 1).
"""

from __future__ import annotations

import math
import warnings
from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

import numpy as np
import pandas as pd
from statsmodels.tsa.statespace.sarimax import SARIMAX

from service.core.checks import check_coverage, check_positive_int
from service.core.data.grid import future_index, index_after
from service.core.data.regressors import aligned_future, aligned_history
from service.core.errors import FitError, SeriesError
from service.core.models.arima.orders import ArimaOrders, Estimate, design_matrix
from service.core.models.arima.search import OrderSearchResult
from service.core.models.base import Description, FitWarning, Forecast, as_dict, residuals_from
from service.core.models.intervals import normal_intervals
from service.core.models.simple import ljung_box_summary

if TYPE_CHECKING:
    from service.core.models.arima.family import ArimaSpec


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
    def label(self) -> str:
        """Box-Jenkins label of the orders (what ``describe`` reports)."""
        return self.orders.label

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
        """Point path and Gaussian intervals from the state-space forecast variance: the
        prediction step run from the filter's last predicted state (what statsmodels'
        forecast does, without extending and re-filtering the model; equal to 1e-9,
        tests/core/models/arima); with regressors through statsmodels' forecast."""
        h = check_positive_int(horizon, "horizon")
        levels = check_coverage(coverage)
        index = future_index(self.y.index, h)
        if self.regressors is None:
            filtered = self._model_results().filter_results
            return self._predicted(_Prediction(filtered), len(self.y), h, levels, index)
        future = aligned_future(future_regressors, self.regressor_names, h)
        x = design_matrix(self.orders, future, len(self.y), h)
        with warnings.catch_warnings(record=True):
            warnings.simplefilter("always")
            prediction = self._model_results().get_forecast(h, exog=x)
            point = np.asarray(prediction.predicted_mean, dtype=float)
            sd = np.sqrt(np.asarray(prediction.var_pred_mean, dtype=float))
        if not (np.all(np.isfinite(point)) and np.all(np.isfinite(sd))):
            raise FitError(f"{self.orders.label} gave a non-finite forecast", field="model")
        return Forecast(index, point, normal_intervals(point, sd, levels))

    def origin_forecasts(
        self, y: pd.Series, origins: Sequence[int], horizon: int, coverage: Sequence[float]
    ) -> list[Forecast]:
        """``refilter(y.iloc[:o]).forecast(horizon, coverage)`` for every origin ``o`` from one
        filter over ``y``: the filter only looks back, so its predicted state and covariance at
        ``o`` are those a filter over ``y.iloc[:o]`` ends with, and the forecast runs the
        prediction step from them (what statsmodels' forecast filter does on missing data;
        equal to 1e-9, tests/core/models/arima). Models with regressors go origin by origin."""
        h = check_positive_int(horizon, "horizon")
        levels = check_coverage(coverage)
        if self.regressors is not None:
            return [self.refilter(y.iloc[:o]).forecast(h, levels) for o in origins]
        for origin in origins:
            check_series(y.iloc[:origin])
            check_size(self.orders, origin, 0)
        filtered = self.refilter(y.iloc[: max(origins)])._model_results().filter_results
        matrices = _Prediction(filtered)
        return [
            self._predicted(matrices, origin, h, levels, index_after(y.index, origin, h))
            for origin in origins
        ]

    def _predicted(
        self,
        at: _Prediction,
        origin: int,
        h: int,
        levels: tuple[float, ...],
        index: pd.DatetimeIndex,
    ) -> Forecast:
        """The forecast from the filter's predicted state and covariance at ``origin``."""
        state = at.filtered.predicted_state[:, origin]
        cov = at.filtered.predicted_state_cov[:, :, origin]
        point, variance = np.empty(h), np.empty(h)
        # The constant's columns at the forecast steps, as statsmodels' forecast gets them.
        x = design_matrix(self.orders, None, origin, h)
        intercepts = np.zeros(h) if x is None else np.dot(x, self.estimate.values[: x.shape[1]])
        design, transition = at.design, at.transition
        for step in range(h):
            point[step] = (design @ state)[0] + intercepts[step]
            variance[step] = (design @ cov @ design.T)[0, 0] + at.noise
            state = transition @ state + at.drift
            cov = transition @ cov @ transition.T + at.shock
        sd = np.sqrt(variance)
        if not (np.all(np.isfinite(point)) and np.all(np.isfinite(sd))):
            raise FitError(f"{self.orders.label} gave a non-finite forecast", field="model")
        return Forecast(index, point, normal_intervals(point, sd, levels))

    def fitted_values(self) -> pd.Series:
        """One-step predictions; NaN over the first d + mD steps (absorbed by the diffuse start)."""
        values = np.asarray(self._model_results().fittedvalues, dtype=float).copy()
        values[: self._burn()] = np.nan
        return pd.Series(values, index=self.y.index, name="fitted")

    def residuals(self) -> pd.Series:
        """Observed minus one-step predictions."""
        return residuals_from(self.y, self.fitted_values())

    def _burn(self) -> int:
        return self.orders.d + self.orders.m * self.orders.D

    def refilter(self, y: pd.Series, regressors: pd.DataFrame | None = None) -> ArimaFitted:
        """The same parameters on another history (rolling origins without refitting)."""
        check_series(y)
        if self.regressors is not None:
            if regressors is None:
                raise FitError(
                    "this model was fitted with regressors: their history is needed to re-filter",
                    field="regressors",
                )
            aligned_history(regressors, y.index)
        check_size(self.orders, len(y), len(self.regressor_names))
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
            family=self.specification.family,
            label=self.label,
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


class _Prediction:
    """The time-invariant system matrices of a filtered model, for the prediction step."""

    def __init__(self, filtered: Any) -> None:
        self.filtered = filtered
        self.design = filtered.design[:, :, 0]
        self.transition = filtered.transition[:, :, 0]
        selection = filtered.selection[:, :, 0]
        self.shock = selection @ filtered.state_cov[:, :, 0] @ selection.T
        self.noise = filtered.obs_cov[0, 0, 0]
        self.drift = filtered.state_intercept[:, 0]


def check_series(y: object) -> None:
    """A pandas Series on a DatetimeIndex with a frequency."""
    if not isinstance(y, pd.Series) or not isinstance(y.index, pd.DatetimeIndex):
        raise SeriesError("expected a pandas Series on a DatetimeIndex", field="series")
    if y.index.freq is None:
        raise SeriesError("the series index has no frequency", field="series")


def check_size(orders: ArimaOrders, n: int, k_regressors: int) -> None:
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
