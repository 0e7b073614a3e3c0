"""Shared machinery of the four benchmark families (mean, naive, seasonal naive, drift).

Their intervals follow Hyndman & Athanasopoulos, FPP3 §5.5 Table 5.2, with
σ̂ = √(Σe²/(T−K−M)); statsmodels' state-space equivalents leave out the
parameter-uncertainty terms of the mean and drift rows, so these are written by hand.
"""

from __future__ import annotations

import time
from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd

from service.core.data.grid import future_index
from service.core.diagnostics.autocorrelation import ljung_box, primary_ljung_box_lag, sample_acf
from service.core.models.base import (
    Description,
    FitWarning,
    Forecast,
    ResidualChecks,
    as_dict,
    residuals_from,
)
from service.core.models.intervals import normal_intervals


@dataclass
class SimpleFitted:
    """A fitted benchmark: a point rule, its in-sample residuals and σ̂ held fixed."""

    specification: Any
    y: pd.Series
    seasonal_period: int
    sigma: float
    parameters: dict[str, float]
    n_estimated: int
    fit_seconds: float = 0.0
    warnings: list[FitWarning] = field(default_factory=list)

    # --- to be provided by each family -------------------------------------------------
    label = "benchmark"

    def _point(self, horizon: int) -> np.ndarray:
        raise NotImplementedError

    def _sd(self, horizon: int) -> np.ndarray:
        raise NotImplementedError

    def _fitted_array(self) -> np.ndarray:
        raise NotImplementedError

    # --- the common shape -------------------------------------------------------------
    def forecast(self, horizon: int, coverage: Sequence[float]) -> Forecast:
        """Point path and Table 5.2 intervals for ``horizon`` steps after the history."""
        point = self._point(horizon)
        sd = self._sd(horizon)
        return Forecast(
            future_index(self.y.index, horizon), point, normal_intervals(point, sd, coverage)
        )

    def fitted_values(self) -> pd.Series:
        """One-step in-sample fits (NaN where the rule has no earlier value)."""
        return pd.Series(self._fitted_array(), index=self.y.index, name="fitted")

    def residuals(self) -> pd.Series:
        """Observed minus fitted."""
        return residuals_from(self.y, self.fitted_values())

    def refilter(self, y: pd.Series) -> SimpleFitted:
        """The same estimates (level, slope, σ̂) applied to another history."""
        clone = type(self)(
            self.specification,
            y,
            self.seasonal_period,
            self.sigma,
            dict(self.parameters),
            self.n_estimated,
            0.0,
            [],
        )
        return clone

    def describe(self) -> Description:
        """Family, label, estimates and residual diagnostics."""
        resid = self.residuals().to_numpy()
        resid = resid[np.isfinite(resid)]
        return Description(
            family=self.specification.family,
            label=self.label,
            specification=as_dict(self.specification),
            parameters={**self.parameters, "sigma": self.sigma},
            information_criteria={},
            residual_variance=self.sigma**2,
            residual_diagnostics=ljung_box_summary(resid, self.seasonal_period),
            observations=int(np.isfinite(self.y.to_numpy(dtype=float)).sum()),
            fit_seconds=self.fit_seconds,
        )


def residual_sigma(residuals: np.ndarray, n_parameters: int) -> float:
    """σ̂ = √(Σe²/(T−K−M)): T−M is the count of usable residuals, K the parameters."""
    usable = residuals[np.isfinite(residuals)]
    dof = usable.size - n_parameters
    if dof <= 0:
        return float("nan")
    return float(np.sqrt(np.sum(usable**2) / dof))


def last_observed(values: np.ndarray) -> float:
    """The last finite value of a history (missing values kept as NaN are skipped)."""
    finite = np.flatnonzero(np.isfinite(values))
    return float(values[finite[-1]])


def ljung_box_summary(
    residuals: np.ndarray, seasonal_period: int, model_dof: int = 0
) -> ResidualChecks:
    """Ljung-Box (1978) Q of the residuals at the diagnostics' decision lag (10, or 2m when
    seasonal, at most n/5), with degrees of freedom reduced by the fitted parameters."""
    n = residuals.size
    if n < 4 or not np.any(residuals - residuals.mean()):
        return ResidualChecks(None, reason="too few or constant residuals")
    lag = primary_ljung_box_lag(n, seasonal_period)
    box = ljung_box(sample_acf(residuals, lag), n, lag, model_dof)
    return ResidualChecks(box)


def timed() -> float:
    """A monotonic clock reading for fit timing."""
    return time.perf_counter()
