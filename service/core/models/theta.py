"""The Theta method in the Hyndman & Billah (2003) form: SES with drift b0/2.

b0 is the OLS slope of the (seasonally adjusted) series on time; the SES starts at the
first observation and its α minimises the one-step squared errors, as in the original
method. Intervals use the IMA(1,1) variance σ²[1 + (h−1)α²], not statsmodels' ThetaModel
intervals (tests/reference/README.md, trap 4).

The share of b0 carried as drift is ½ in the original method (theta coefficient 2); with
``slope_share="fitted"`` it is 1 − 1/θ for a fitted θ >= 1 (so in [0, 1]), estimated with α
by the one-step squared errors (Fiorucci, Pellegrini, Louzada, Petropoulos & Koehler 2016,
the optimised theta model); ``"fitted_running"`` scores those one-step errors with the OLS
line refitted on the data up to each step (their dynamic model). theta_fit.py fits them.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field, replace
from typing import ClassVar

import numpy as np
import pandas as pd

from service.core.checks import complete_values
from service.core.data.grid import future_index
from service.core.diagnostics.autocorrelation import seasonal_lag_stands_out
from service.core.errors import FitError
from service.core.models.base import Description, FitWarning, Forecast, as_dict, residuals_from
from service.core.models.base import parameter as param
from service.core.models.intervals import Interval, normal_intervals
from service.core.models.labels import model_label
from service.core.models.simple import ljung_box_summary, timed
from service.core.models.theta_fit import fitted_share, ols_slope, running_slopes, ses_levels

MULTIPLICATIVE = "multiplicative"
ADDITIVE = "additive"
SLOPE_SHARES = ("half", "fitted", "fitted_running")


@dataclass(frozen=True)
class ThetaSpec:
    """Theta forecasts; seasonal adjustment by classical multiplicative decomposition."""

    family: ClassVar[str] = "theta"
    summary: ClassVar[str] = (
        "Simple exponential smoothing with half the linear-trend slope as drift (Theta method)."
    )
    constraints: ClassVar[tuple[str, ...]] = (
        "Seasonal adjustment (auto) applies when the period > 1, there "
        "are two full seasons and the lag-m autocorrelation passes a 90% test.",
        "Intervals use the IMA(1,1) variance σ²[1 + (h−1)α²] on the adjusted scale.",
    )

    seasonal_adjustment: str = param(
        "auto",
        "Classical seasonal adjustment (multiplicative; additive when a value is <= 0): "
        "auto (tested), always, or never.",
        kind="choice",
        allowed=("auto", "always", "never"),
    )
    slope_share: str = param(
        "half",
        "Share of the least-squares slope carried as drift: half (the original method), "
        "fitted (with α, by one-step squared errors), or fitted_running (the same, with "
        "the slope refitted on the data up to each step).",
        kind="choice",
        allowed=SLOPE_SHARES,
    )

    def fit(self, y: pd.Series, seasonal_period: int = 1) -> ThetaFitted:
        """Fit α by least squares on the adjusted series and the drift by OLS on time."""
        start = timed()
        values = complete_values(y, "theta", 3)
        notes: list[FitWarning] = []
        indices, kind = self._seasonal_indices(values, seasonal_period, notes)
        adjusted = deseasoned(values, indices, kind, 0)
        slope = ols_slope(adjusted)
        running = self.slope_share == "fitted_running"
        if self.slope_share == "half":
            alpha, share = ses_alpha(adjusted), 0.5
        else:
            alpha, share = fitted_share(adjusted, running)
        seconds = timed() - start
        return ThetaFitted(
            self, y, seasonal_period, alpha, slope, indices, seconds, notes, kind, share, running
        )

    def _seasonal_indices(
        self, values: np.ndarray, period: int, notes: list[FitWarning]
    ) -> tuple[tuple[float, ...], str]:
        """Seasonal indices and their kind: multiplicative for positive data, additive when
        a value is zero or negative (a ratio to the trend means nothing there)."""
        if self.seasonal_adjustment == "never" or period < 2:
            return (1.0,), MULTIPLICATIVE
        enough = values.size >= 2 * period
        kind = MULTIPLICATIVE if bool(np.all(values > 0)) else ADDITIVE
        if self.seasonal_adjustment == "always":
            if not enough:
                raise FitError(
                    "seasonal adjustment needs two full seasons",
                    field="model.seasonal_adjustment",
                )
            return seasonal_indices(values, period, kind), kind
        if enough and seasonal_lag_stands_out(values, period):
            return seasonal_indices(values, period, kind), kind
        if not enough:
            notes.append(
                FitWarning(
                    "no_seasonal_adjustment",
                    "theta: seasonal adjustment skipped (needs two full seasons)",
                )
            )
        return (1.0,), MULTIPLICATIVE


def _sse(alpha: float, values: np.ndarray) -> float:
    levels = ses_levels(values, alpha)
    return float(np.sum((values[1:] - levels[:-1]) ** 2))


def ses_alpha(values: np.ndarray) -> float:
    """α in [1e-4, 1] minimising the one-step squared errors of SES."""
    from scipy import optimize

    found = optimize.minimize_scalar(
        _sse, bounds=(1e-4, 1.0), args=(values,), method="bounded", options={"xatol": 1e-10}
    )
    return float(found.x)


def theta_path(
    level: float, alpha: float, slope: float, n: int, horizon: int, share: float = 0.5
) -> np.ndarray:
    """ℓ_T + ½ b0 [h − 1 + 1/α − (1−α)^T / α] for h = 1..horizon (Hyndman & Billah 2003);
    ``share`` in place of ½ for another theta coefficient θ (share = 1 − 1/θ)."""
    h = np.arange(1, horizon + 1, dtype=float)
    return level + share * slope * (h - 1.0 + 1.0 / alpha - (1.0 - alpha) ** n / alpha)


def seasonal_indices(values: np.ndarray, period: int, kind: str) -> tuple[float, ...]:
    """Classical decomposition by statsmodels: centred moving-average ratios (multiplicative,
    mean 1) or differences (additive, mean 0), averaged per season; one cycle from position 0."""
    from statsmodels.tsa.seasonal import seasonal_decompose

    parts = seasonal_decompose(values, model=kind, period=period)
    return tuple(float(v) for v in np.asarray(parts.seasonal)[:period])


def deseasoned(values: np.ndarray, indices: tuple[float, ...], kind: str, start: int) -> np.ndarray:
    """``values`` (whose first point has season position ``start``) without the season."""
    season = _cycle(indices, start, values.size)
    return values - season if kind == ADDITIVE else values / season


def reseasoned(values: np.ndarray, indices: tuple[float, ...], kind: str, start: int) -> np.ndarray:
    """The season put back on adjusted ``values`` starting at season position ``start``."""
    season = _cycle(indices, start, values.size)
    return values + season if kind == ADDITIVE else values * season


def _cycle(indices: tuple[float, ...], start: int, count: int) -> np.ndarray:
    return np.asarray(indices)[(start + np.arange(count)) % len(indices)]


@dataclass
class ThetaFitted:
    """Fitted Theta: α, b0 and the seasonal indices held fixed."""

    specification: ThetaSpec
    y: pd.Series
    seasonal_period: int
    alpha: float
    slope: float
    seasonal_indices: tuple[float, ...]
    fit_seconds: float = 0.0
    warnings: list[FitWarning] = field(default_factory=list)
    seasonal_kind: str = MULTIPLICATIVE
    """How the indices apply: ratios (multiplicative) or differences (additive)."""
    share: float = 0.5
    """The share of b0 carried as drift (1 − 1/θ): ½ in the original method."""
    running: bool = False
    """Whether b0 is the slope of the data so far (refitted by ``refilter``)."""

    def settled_structure(self) -> ThetaSpec:
        """Theta with the seasonal adjustment this fit decided on, fixed for another history."""
        adjusted = len(self.seasonal_indices) > 1
        return ThetaSpec("always" if adjusted else "never", self.specification.slope_share)

    @property
    def label(self) -> str:
        """Theta, naming the seasonal period (and an additive adjustment) when indices were
        applied, and a slope share that was fitted."""
        kind = "additive" if self.seasonal_kind == ADDITIVE else "classic"
        return model_label(
            "theta",
            period=max(len(self.seasonal_indices), 1),
            variant=kind,
            slope_share=self.specification.slope_share,
        )

    def _adjusted(self) -> np.ndarray:
        values = self.y.to_numpy(dtype=float)
        return deseasoned(values, self.seasonal_indices, self.seasonal_kind, 0)

    def _fitted_adjusted(self) -> np.ndarray:
        """One-step in-sample theta forecasts on the adjusted scale (NaN for the first point)."""
        x = self._adjusted()
        levels = ses_levels(x, self.alpha)
        t = np.arange(1, x.size, dtype=float)
        slope: float | np.ndarray = self.slope
        if self.running:
            slope = running_slopes(x)[1:-1]
        drift = self.share * slope * (1.0 / self.alpha - (1.0 - self.alpha) ** t / self.alpha)
        return np.r_[np.nan, levels[:-1] + drift]

    def sigma(self) -> float:
        """σ̂ of the one-step errors, Σe²/(n_e − k) for the k estimates: α and b0, and the
        slope share when fitted."""
        e = self._adjusted() - self._fitted_adjusted()
        e = e[np.isfinite(e)]
        fitted = self.specification.slope_share != "half"
        dof = max(e.size - (3 if fitted else 2), 1)
        return float(np.sqrt(np.sum(e**2) / dof))

    def forecast(self, horizon: int, coverage: Sequence[float]) -> Forecast:
        """Theta path with the season put back; IMA(1,1) intervals on the adjusted scale,
        reseasoned the same way."""
        x = self._adjusted()
        level = float(ses_levels(x, self.alpha)[-1])
        path = theta_path(level, self.alpha, self.slope, x.size, horizon, self.share)
        h = np.arange(1, horizon + 1, dtype=float)
        sd = self.sigma() * np.sqrt(1.0 + (h - 1.0) * self.alpha**2)
        adjusted = normal_intervals(path, sd, coverage)

        def back(values: np.ndarray) -> np.ndarray:
            return reseasoned(values, self.seasonal_indices, self.seasonal_kind, x.size)

        intervals = tuple(Interval(i.coverage, back(i.lower), back(i.upper)) for i in adjusted)
        return Forecast(future_index(self.y.index, horizon), back(path), intervals)

    def fitted_values(self) -> pd.Series:
        """One-step in-sample forecasts on the data scale."""
        fitted = reseasoned(self._fitted_adjusted(), self.seasonal_indices, self.seasonal_kind, 0)
        return pd.Series(fitted, index=self.y.index, name="fitted")

    def residuals(self) -> pd.Series:
        """Observed minus one-step fitted."""
        return residuals_from(self.y, self.fitted_values())

    def refilter(self, y: pd.Series) -> ThetaFitted:
        """α, the share, b0 and the indices held fixed on a history with the same start
        (season phase); a running slope is b0 of the new history."""
        values = complete_values(y, "theta", 3)
        slope = self.slope
        if self.running:
            slope = ols_slope(deseasoned(values, self.seasonal_indices, self.seasonal_kind, 0))
        return replace(self, y=y, slope=slope, fit_seconds=0.0, warnings=[])

    def describe(self) -> Description:
        """α, b0, drift, seasonal indices, σ̂ and residual checks (no likelihood criteria)."""
        params = {"alpha": self.alpha, "b0": self.slope, "drift": self.share * self.slope}
        params["slope_share"] = self.share
        if len(self.seasonal_indices) > 1:
            params.update(
                {f"seasonal_index_{i + 1}": v for i, v in enumerate(self.seasonal_indices)}
            )
        sigma = self.sigma()
        params["sigma"] = sigma
        resid = self.residuals().to_numpy()
        return Description(
            family="theta",
            label=self.label,
            specification=as_dict(self.specification),
            parameters=params,
            information_criteria={},
            residual_variance=sigma**2,
            residual_diagnostics=replace(
                ljung_box_summary(resid[np.isfinite(resid)], self.seasonal_period, 1),
                interval_method="analytic, IMA(1,1) variance",
            ),
            observations=len(self.y),
            fit_seconds=self.fit_seconds,
        )
