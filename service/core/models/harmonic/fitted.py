"""A fitted dynamic harmonic regression: forecasts, fitted values and refilters through
statsmodels' SARIMAX at the estimated parameters."""

from __future__ import annotations

import math
import warnings
from collections.abc import Sequence
from dataclasses import dataclass, field, replace
from typing import TYPE_CHECKING, Any

import numpy as np
import pandas as pd
from statsmodels.tsa.statespace.sarimax import SARIMAX

from service.core.checks import check_coverage, check_positive_int
from service.core.data.grid import future_index
from service.core.errors import FitError, SeriesError
from service.core.models.arima.orders import information_criteria
from service.core.models.base import Description, FitWarning, Forecast, as_dict, residuals_from
from service.core.models.harmonic.errors import ErrorModel
from service.core.models.harmonic.terms import FourierTerms
from service.core.models.intervals import normal_intervals
from service.core.models.labels import model_label
from service.core.models.simple import ljung_box_summary

if TYPE_CHECKING:
    from service.core.models.harmonic.family import HarmonicSpec


@dataclass
class HarmonicFitted:
    """The chosen terms, the error model and the coefficients; SARIMAX is rebuilt on demand.

    A refilter onto a history that continues this one (a backtest's later origin) forecasts
    from this model's filtered state, extended over the new points only (statsmodels'
    ``extend``), instead of filtering the whole history again: the Kalman filter is recursive,
    so the forecasts agree to rounding (tests/core/models/test_harmonic.py)."""

    specification: HarmonicSpec
    y: pd.Series
    terms: FourierTerms
    errors: ErrorModel
    coefficients: np.ndarray
    fit_seconds: float = 0.0
    warnings: list[FitWarning] = field(default_factory=list)
    origin: pd.Timestamp | None = None
    _filtered: Any = field(default=None, repr=False, compare=False)
    _extended: Any = field(default=None, repr=False, compare=False)
    _earlier: HarmonicFitted | None = field(default=None, repr=False, compare=False)
    """The model this one was refiltered from, when this history continues its history."""

    def __post_init__(self) -> None:
        if self.origin is None:
            self.origin = self.y.index[0]

    def __getstate__(self) -> dict[str, Any]:
        state = dict(self.__dict__)
        state["_filtered"] = state["_extended"] = state["_earlier"] = None
        return state

    def _positions(self, index: pd.DatetimeIndex) -> np.ndarray:
        assert self.origin is not None
        return steps_from(self.origin, index)

    def _design(self, index: pd.DatetimeIndex) -> np.ndarray:
        x = self.terms.matrix(self._positions(index))
        return x[:, 1:] if self.errors.d else x

    def _beta(self) -> np.ndarray:
        return self.coefficients[1:] if self.errors.d else self.coefficients

    def _results(self) -> Any:
        if self._filtered is None:
            e = self.errors
            with warnings.catch_warnings(record=True):
                warnings.simplefilter("always")
                model = SARIMAX(
                    self.y.to_numpy(dtype=float),
                    exog=self._design(self.y.index),
                    order=(e.p, e.d, e.q),
                    trend="n",
                    use_exact_diffuse=True,
                )
                params = np.r_[self._beta(), e.ar, e.ma, e.sigma2]
                self._filtered = model.filter(params, cov_type="none")
        return self._filtered

    def _state_at_end(self) -> Any:
        """Filter results ending at the last observation, for forecasting: the earlier model's
        extended over the new points when there is one, else the whole history's."""
        earlier = self._earlier
        if self._filtered is not None or earlier is None:
            return self._results()
        if self._extended is None:
            start = len(earlier.y)
            if start == len(self.y):
                return earlier._state_at_end()
            tail = self.y.iloc[start:]
            with warnings.catch_warnings(record=True):
                warnings.simplefilter("always")
                self._extended = earlier._state_at_end().extend(
                    tail.to_numpy(dtype=float), exog=self._design(tail.index)
                )
        return self._extended

    def forecast(self, horizon: int, coverage: Sequence[float]) -> Forecast:
        """Fourier terms continued, ARIMA errors forecast; Gaussian intervals."""
        h = check_positive_int(horizon, "horizon")
        levels = check_coverage(coverage)
        index = future_index(self.y.index, h)
        with warnings.catch_warnings(record=True):
            warnings.simplefilter("always")
            prediction = self._state_at_end().get_forecast(h, exog=self._design(index))
            point = np.asarray(prediction.predicted_mean, dtype=float)
            sd = np.sqrt(np.asarray(prediction.var_pred_mean, dtype=float))
        if not (np.all(np.isfinite(point)) and np.all(np.isfinite(sd))):
            raise FitError("harmonic regression gave a non-finite forecast", field="model")
        return Forecast(index, point, normal_intervals(point, sd, levels))

    def fitted_values(self) -> pd.Series:
        """One-step predictions (NaN over the first d steps, absorbed by the diffuse start)."""
        values = np.asarray(self._results().fittedvalues, dtype=float).copy()
        values[: self.errors.d] = np.nan
        return pd.Series(values, index=self.y.index, name="fitted")

    def residuals(self) -> pd.Series:
        """Observed minus one-step predictions."""
        return residuals_from(self.y, self.fitted_values())

    def refilter(self, y: pd.Series) -> HarmonicFitted:
        """The same terms and parameters on another history (positions kept from the origin)."""
        check_series(y)
        out = HarmonicFitted(
            self.specification, y, self.terms, self.errors, self.coefficients, 0.0, [], self.origin
        )
        if continues(self.y, y):
            out._earlier = self
        return out

    def settled_structure(self) -> HarmonicSpec:
        """The same periods with the harmonics and the error order this fit chose, for another
        history: what a backtest scores is then what the whole-series fit delivers (only the
        coefficients are estimated again)."""
        e = self.errors
        return replace(
            self.specification,
            periods=self.terms.periods,
            harmonics=self.terms.harmonics,
            error_order=(e.p, e.d, e.q),
        )

    def describe(self) -> Description:
        """Label with periods, harmonics and error orders; coefficients by name; AIC/AICc/BIC."""
        e = self.errors
        names = self.terms.names()
        parameters = {name: float(v) for name, v in zip(names, self.coefficients, strict=True)}
        parameters |= {f"ar{i + 1}": v for i, v in enumerate(e.ar)}
        parameters |= {f"ma{i + 1}": v for i, v in enumerate(e.ma)}
        n = int(np.isfinite(self.y.to_numpy(dtype=float)).sum())
        k = len(self._beta()) + e.p + e.q + 1
        loglik = float(self._results().llf)
        aic, small_sample, bic = information_criteria(loglik, k, n)
        criteria = {"log_likelihood": loglik, "aic": aic, "bic": bic}
        if math.isfinite(small_sample):
            criteria["aicc"] = small_sample
        resid = self.residuals().to_numpy()
        resid = resid[np.isfinite(resid)]
        return Description(
            family=self.specification.family,
            label=model_label(
                "harmonic_regression",
                period=self.terms.periods,
                harmonics=self.terms.harmonics,
                base=e.label,
            ),
            specification=as_dict(self.specification),
            parameters=parameters,
            information_criteria=criteria,
            residual_variance=e.sigma2,
            residual_diagnostics=ljung_box_summary(
                resid, round(min(self.terms.periods)), model_dof=e.p + e.q
            ),
            observations=n,
            fit_seconds=self.fit_seconds,
        )


def continues(earlier: pd.Series, later: pd.Series) -> bool:
    """Whether ``later`` is ``earlier`` with (possibly zero) points appended."""
    n = len(earlier)
    if n == 0 or len(later) < n or later.index.freq != earlier.index.freq:
        return False
    if later.index[0] != earlier.index[0] or later.index[n - 1] != earlier.index[-1]:
        return False
    return bool(
        np.array_equal(
            later.to_numpy(dtype=float)[:n], earlier.to_numpy(dtype=float), equal_nan=True
        )
    )


def steps_from(origin: pd.Timestamp, index: pd.DatetimeIndex) -> np.ndarray:
    """Steps of the index's frequency from ``origin`` to each timestamp (negative before it)."""
    freq = index.freq
    if freq is None:
        raise SeriesError("the series index has no frequency", field="series")
    first, last = min(origin, index[0]), max(origin, index[-1])
    grid = pd.date_range(first, last, freq=freq)
    at = grid.get_indexer(index)
    zero = grid.get_indexer([origin])[0]
    if zero < 0 or np.any(at < 0):
        raise SeriesError("the history must continue the fitted series' timestamps", field="series")
    return (at - zero).astype(float)


def check_series(y: object) -> None:
    if not isinstance(y, pd.Series) or not isinstance(y.index, pd.DatetimeIndex):
        raise SeriesError("expected a pandas Series on a DatetimeIndex", field="series")
    if y.index.freq is None:
        raise SeriesError("the series index has no frequency", field="series")
