"""Croston's method and the Syntetos-Boylan approximation (SBA) for intermittent demand.

Conventions (fixed so that results are reproducible): the first non-zero demand
initialises the size, and its 1-based position the interval; both are then smoothed
with the same α at each later demand. SBA multiplies the ratio by (1 − α/2).
Intervals: empirical quantiles of the in-sample one-step errors after the first demand,
added to the flat point forecast and floored at zero (demand is never negative); they
do not widen with the horizon, a stated approximation for a slowly updated rate.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field, replace
from typing import ClassVar

import numpy as np
import pandas as pd

from service.core.checks import complete_values
from service.core.data.grid import future_index
from service.core.errors import FitError
from service.core.models.base import (
    Description,
    FitWarning,
    Forecast,
    as_dict,
    parameter,
    residuals_from,
)
from service.core.models.intervals import Interval
from service.core.models.labels import model_label
from service.core.models.simple import ljung_box_summary, timed


@dataclass(frozen=True)
class CrostonState:
    """Smoothed demand size and inter-demand interval after the last observation."""

    size: float
    interval: float
    fitted: np.ndarray


def croston_filter(values: np.ndarray, alpha: float) -> CrostonState:
    """Run the size and interval recursions; ``fitted`` holds the one-step rates (NaN before)."""
    demands = np.flatnonzero(values > 0)
    fitted = np.full(values.size, np.nan)
    first = int(demands[0])
    size, interval = float(values[first]), float(first + 1)
    last = first
    for t in range(first + 1, values.size):
        fitted[t] = size / interval
        if values[t] > 0:
            size += alpha * (values[t] - size)
            interval += alpha * ((t - last) - interval)
            last = t
    return CrostonState(size, interval, fitted)


@dataclass(frozen=True)
class CrostonSpec:
    """Croston (classic) or SBA forecasts of the demand rate per period."""

    family: ClassVar[str] = "croston"
    summary: ClassVar[str] = (
        "Intermittent demand: smoothed demand size over smoothed interval between demands."
    )
    constraints: ClassVar[tuple[str, ...]] = (
        "Values must be non-negative with at least one non-zero demand.",
        "The first demand initialises the size, its position the interval.",
        "Intervals are empirical quantiles of in-sample one-step errors, floored at zero.",
    )

    variant: str = parameter(
        "classic",
        "classic (Croston 1972) or sba (Syntetos & Boylan 2005 bias correction).",
        kind="choice",
        allowed=("classic", "sba"),
    )
    alpha: float = parameter(
        0.1, "Smoothing weight of size and interval.", kind="number", minimum=0.0, maximum=1.0
    )

    def fit(self, y: pd.Series, seasonal_period: int = 1) -> CrostonFitted:
        """Smooth sizes and intervals; nothing is estimated beyond the given α."""
        start = timed()
        _checked(y)
        if not 0.0 < self.alpha <= 1.0:
            raise FitError("alpha must lie in (0, 1]", field="model.alpha")
        return CrostonFitted(self, y, seasonal_period, timed() - start)


def _checked(y: pd.Series) -> np.ndarray:
    values = complete_values(y, "croston")
    if np.any(values < 0):
        index = int(np.flatnonzero(values < 0)[0])
        raise FitError("demand must be non-negative", field=f"series.values[{index}]")
    if not np.any(values > 0):
        raise FitError("croston needs at least one non-zero demand", field="series.values")
    return values


@dataclass
class CrostonFitted:
    """Fitted Croston/SBA; the state is recomputed from the history (α is the only parameter)."""

    specification: CrostonSpec
    y: pd.Series
    seasonal_period: int
    fit_seconds: float = 0.0
    warnings: list[FitWarning] = field(default_factory=list)

    @property
    def label(self) -> str:
        """Croston's method, with the Syntetos-Boylan correction for the SBA variant."""
        return model_label("croston", variant=self.specification.variant)

    @property
    def _factor(self) -> float:
        return 1.0 - self.specification.alpha / 2.0 if self.specification.variant == "sba" else 1.0

    def _state(self) -> CrostonState:
        return croston_filter(self.y.to_numpy(dtype=float), self.specification.alpha)

    def rate(self) -> float:
        """The forecast demand per period."""
        state = self._state()
        return self._factor * state.size / state.interval

    def forecast(self, horizon: int, coverage: Sequence[float]) -> Forecast:
        """Flat rate; bounds from the empirical one-step error quantiles, never below zero."""
        values = self.y.to_numpy(dtype=float)
        state = croston_filter(values, self.specification.alpha)
        point = np.full(horizon, self._factor * state.size / state.interval)
        errors = values - state.fitted * self._factor
        errors = errors[np.isfinite(errors)]
        intervals = []
        for c in coverage:
            if errors.size:
                low = min(float(np.quantile(errors, 0.5 - c / 2)), 0.0)
                high = max(float(np.quantile(errors, 0.5 + c / 2)), 0.0)
            else:
                low = high = 0.0
            lower = np.maximum(point + low, 0.0)
            intervals.append(Interval(float(c), lower, point + high))
        return Forecast(future_index(self.y.index, horizon), point, tuple(intervals))

    def fitted_values(self) -> pd.Series:
        """One-step rates (SBA-corrected for the sba variant), NaN up to the first demand."""
        fitted = self._state().fitted * self._factor
        return pd.Series(fitted, index=self.y.index, name="fitted")

    def residuals(self) -> pd.Series:
        """Observed minus one-step fitted."""
        return residuals_from(self.y, self.fitted_values())

    def refilter(self, y: pd.Series) -> CrostonFitted:
        """The same α and conventions on another history."""
        _checked(y)
        return replace(self, y=y, fit_seconds=0.0, warnings=[])

    def describe(self) -> Description:
        """α, the smoothed size and interval, the rate and the residual checks."""
        state = self._state()
        resid = self.residuals().to_numpy()
        resid = resid[np.isfinite(resid)]
        return Description(
            family="croston",
            label=self.label,
            specification=as_dict(self.specification),
            parameters={
                "alpha": self.specification.alpha,
                "demand_size": state.size,
                "demand_interval": state.interval,
                "rate": self.rate(),
            },
            information_criteria={},
            residual_variance=float(np.mean(resid**2)) if resid.size else None,
            residual_diagnostics=replace(
                ljung_box_summary(resid, self.seasonal_period),
                interval_method="empirical quantiles of one-step errors, floored at zero",
            ),
            observations=len(self.y),
            fit_seconds=self.fit_seconds,
        )
