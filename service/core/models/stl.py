"""STL decomposition plus a non-seasonal model on the seasonally adjusted series.

Suited to long periods (52 weeks, 168 hours) where seasonal ARIMA or ETS states become
unwieldy. The seasonal component of the last full cycle is re-added to the base forecast
(seasonal naive on the component); intervals are the base model's on the adjusted series,
so they leave out the uncertainty of the seasonal estimate.
"""

from __future__ import annotations

import time
from collections.abc import Sequence
from dataclasses import dataclass, field, replace
from typing import Any, ClassVar

import numpy as np
import pandas as pd

from service.core.checks import check_positive_int
from service.core.data.filling import interpolate_gaps
from service.core.errors import FitError, SeriesError, WindvaneError
from service.core.models.base import Description, FitWarning, Forecast, as_dict, parameter
from service.core.models.ets.family import EtsSpec
from service.core.models.intervals import Interval
from service.core.models.labels import model_label
from service.core.models.library_warnings import captured

DEFAULT_BASE = EtsSpec(season="none")


def base_parameter() -> Any:
    """The ``base`` hyperparameter of the decomposition families (non-seasonal ETS by default)."""
    # A frozen specification is immutable, so sharing it as the default is safe.
    return parameter(
        DEFAULT_BASE,
        "Non-seasonal specification for the adjusted series (default: ETS, components by AICc).",
        kind="specification",
    )


@dataclass(frozen=True)
class StlSpec:
    """STL (Cleveland et al. 1990) then ``base`` fitted without season on the adjusted series."""

    family: ClassVar[str] = "stl"
    summary: ClassVar[str] = (
        "STL decomposition; a non-seasonal base model forecasts the seasonally adjusted "
        "series and the last cycle of the seasonal component is added back."
    )
    constraints: ClassVar[tuple[str, ...]] = (
        "Needs a seasonal period > 1 and at least two full seasons.",
        "The base is fitted with seasonal period 1; give it no seasonal component.",
        "Intervals are the base model's on the adjusted series: the seasonal component "
        "is treated as known.",
    )

    base: Any = base_parameter()  # noqa: RUF009 (a frozen specification: safe to share)
    robust: bool = parameter(
        True, "Robust STL fitting (outliers get little weight in the seasonal).", kind="boolean"
    )

    def fit(self, y: pd.Series, seasonal_period: int = 1) -> StlFitted:
        """Decompose, fit the base on the adjusted series and keep the last seasonal cycle."""
        start = time.perf_counter()
        m = check_positive_int(seasonal_period, "series.seasonal_period")
        seasonal, notes = _seasonal_component(y, m, self.robust)
        adjusted = y - seasonal
        base = fit_base(self.base, adjusted)
        return StlFitted(
            specification=self,
            y=y,
            seasonal_period=m,
            seasonal=seasonal,
            base=base,
            fit_seconds=time.perf_counter() - start,
            warnings=notes + list(base.warnings),
        )


@dataclass
class StlFitted:
    """The seasonal component, the fitted base on the adjusted series, and the history."""

    specification: StlSpec
    y: pd.Series
    seasonal_period: int
    seasonal: pd.Series
    base: Any
    fit_seconds: float = 0.0
    warnings: list[FitWarning] = field(default_factory=list)

    def _ahead(self, horizon: int) -> np.ndarray:
        cycle = self.seasonal.to_numpy(dtype=float)[-self.seasonal_period :]
        return cycle[np.arange(horizon) % self.seasonal_period]

    def forecast(self, horizon: int, coverage: Sequence[float]) -> Forecast:
        """Base forecast of the adjusted series plus the last seasonal cycle, repeated."""
        inner = self.base.forecast(horizon, coverage)
        season = self._ahead(len(inner.point))
        intervals = tuple(
            Interval(i.coverage, i.lower + season, i.upper + season) for i in inner.intervals
        )
        return Forecast(inner.index, inner.point + season, intervals)

    def fitted_values(self) -> pd.Series:
        """Base one-step fits on the adjusted series plus the seasonal component."""
        values = self.base.fitted_values().to_numpy(dtype=float) + self.seasonal.to_numpy()
        return pd.Series(values, index=self.y.index, name="fitted")

    def residuals(self) -> pd.Series:
        """Observed minus fitted."""
        resid = self.y.to_numpy(dtype=float) - self.fitted_values().to_numpy()
        return pd.Series(resid, index=self.y.index, name="residuals")

    def refilter(self, y: pd.Series) -> StlFitted:
        """Seasonal component and base held fixed: no re-decomposition, so nothing peeks ahead.

        Timestamps of the fit keep their seasonal value; later (or earlier) ones repeat the
        last fitted cycle, as the forecast does.
        """
        seasonal = carried_seasonal(self.seasonal, self.seasonal_period, y.index)
        base = self.base.refilter(y - seasonal)
        return StlFitted(self.specification, y, self.seasonal_period, seasonal, base, 0.0, [])

    def describe(self) -> Description:
        """The base model's description under an ``STL (period m) then base`` label."""
        inner = self.base.describe()
        return replace(
            inner,
            family=StlSpec.family,
            label=model_label("stl", period=self.seasonal_period, base=inner.label),
            specification=as_dict(self.specification),
            fit_seconds=self.fit_seconds,
        )


def _seasonal_component(y: pd.Series, m: int, robust: bool) -> tuple[pd.Series, list[FitWarning]]:
    """STL's seasonal component on the series (missing values interpolated for STL only)."""
    from statsmodels.tsa.seasonal import STL

    if not isinstance(y, pd.Series):
        raise SeriesError("expected a pandas Series", field="series")
    if m < 2:
        raise FitError("stl needs a seasonal period > 1", field="series.seasonal_period")
    if len(y) < 2 * m:
        raise FitError(
            f"stl needs at least two full seasons ({2 * m} points), got {len(y)}",
            field="series.values",
        )
    values = y.to_numpy(dtype=float)
    notes: list[FitWarning] = []
    if not np.all(np.isfinite(values)):
        values = interpolate_gaps(values)
        notes.append(FitWarning("interpolated", "missing values interpolated for STL"))
    with captured(notes):
        parts = STL(values, period=m, robust=robust).fit()
    return pd.Series(np.asarray(parts.seasonal), index=y.index, name="seasonal"), notes


def fit_base(base: Any, adjusted: pd.Series) -> Any:
    """The base fitted with period 1; its errors are re-labelled under ``model.base``."""
    try:
        return base.fit(adjusted, 1)
    except WindvaneError as exc:
        if any(p.field.startswith("model.") for p in exc.problems):
            moved = [p.field.replace("model.", "model.base.", 1) for p in exc.problems]
            raise type(exc)(exc.message, field=moved[0]) from exc
        raise


def carried_seasonal(seasonal: pd.Series, m: int, index: pd.DatetimeIndex) -> pd.Series:
    """A fitted seasonal component on another index: its own value at fitted timestamps, the
    last fitted cycle repeated elsewhere (as the forecast does)."""
    own = seasonal.index
    combined = own.union(index)
    steps = combined.get_indexer(index) - combined.get_loc(own[0])
    if own.freq is not None and len(combined) != len(
        pd.date_range(combined[0], combined[-1], freq=own.freq)
    ):
        raise SeriesError("the history must continue the fitted series' timestamps", field="series")
    known = seasonal.to_numpy(dtype=float)
    n = known.size
    cycle = known[-m:]
    values = np.where(
        (steps >= 0) & (steps < n),
        known[np.clip(steps, 0, n - 1)],
        cycle[(steps - (n - m)) % m],
    )
    return pd.Series(values, index=index, name="seasonal")
