"""MSTL decomposition (several seasonal periods) plus a non-seasonal model on the adjusted series.

statsmodels' MSTL (Bandara, Hyndman & Bergmeir 2021) removes one STL seasonal component per
period, shortest first, and iterates twice. Each component's last cycle is carried forward
and added to the base model's forecast of the seasonally adjusted series.

Intervals: the base model's own intervals on the adjusted series (its parameter and
innovation uncertainty as that family computes it), widened for the seasonal components:
each half-width h becomes sqrt(h² + (z·s)²), where s² is the summed mean square of every
component's cycle-to-cycle change over its last two cycles (how much a carried-forward cycle
is typically off) and z the level's normal quantile.
"""

from __future__ import annotations

import math
import time
from collections.abc import Sequence
from dataclasses import dataclass, field, replace
from typing import Any, ClassVar

import numpy as np
import pandas as pd

from service.core.data.filling import interpolate_gaps
from service.core.data.periods import check_periods
from service.core.diagnostics.cycles import mstl_parts
from service.core.errors import FitError, SeriesError
from service.core.models.base import Description, FitWarning, Forecast, as_dict, parameter
from service.core.models.intervals import Interval, normal_quantile
from service.core.models.labels import model_label
from service.core.models.stl import base_parameter, carried_seasonal, fit_base


def periods_parameter() -> Any:
    """The ``periods`` hyperparameter of the several-period families (null: the series')."""
    return parameter(
        None,
        "Seasonal periods (observations per cycle); null: the series' own.",
        kind="numbers",
        minimum=2,
        maximum=100_000,
    )


@dataclass(frozen=True)
class MstlSpec:
    """MSTL with one seasonal component per period, then ``base`` on the adjusted series."""

    family: ClassVar[str] = "mstl"
    summary: ClassVar[str] = (
        "MSTL decomposition with one seasonal component per period; a non-seasonal base model "
        "forecasts the seasonally adjusted series and each component's last cycle is added back."
    )
    constraints: ClassVar[tuple[str, ...]] = (
        "periods: whole numbers of steps (non-integer ones are rounded); null: the series' "
        "seasonal periods. Each needs two full cycles of history.",
        "The base is fitted with seasonal period 1; give it no seasonal component.",
        "Intervals: the base model's, each half-width h widened to sqrt(h² + (z·s)²) with s² "
        "the mean square cycle-to-cycle change of the seasonal components.",
    )

    periods: tuple[float, ...] | None = periods_parameter()
    base: Any = base_parameter()  # noqa: RUF009 (a frozen specification: safe to share)

    def fit(self, y: pd.Series, seasonal_period: int = 1) -> MstlFitted:
        """Decompose, fit the base on the adjusted series and keep every seasonal component."""
        start = time.perf_counter()
        periods = self._periods(seasonal_period)
        components, notes = mstl_components(y, periods)
        adjusted = y - components.sum(axis=1)
        base = fit_base(self.base, adjusted)
        return MstlFitted(
            specification=self,
            y=y,
            periods=periods,
            components=components,
            base=base,
            fit_seconds=time.perf_counter() - start,
            warnings=notes + list(base.warnings),
        )

    def _periods(self, seasonal_period: int) -> tuple[int, ...]:
        if self.periods is None:
            if isinstance(seasonal_period, bool) or not isinstance(seasonal_period, int):
                raise FitError(
                    "seasonal_period must be a whole number", field="series.seasonal_period"
                )
            if seasonal_period < 2:
                raise FitError("mstl needs a seasonal period > 1", field="series.seasonal_period")
            return (seasonal_period,)
        given = check_periods(self.periods, "model.periods")
        whole = sorted({round(p) for p in given})
        return tuple(whole)


def mstl_components(
    y: pd.Series, periods: tuple[int, ...]
) -> tuple[pd.DataFrame, list[FitWarning]]:
    """One seasonal column per period (missing values interpolated for MSTL only)."""
    if not isinstance(y, pd.Series):
        raise SeriesError("expected a pandas Series", field="series")
    for i, m in enumerate(periods):
        if len(y) < 2 * m + 1:
            raise FitError(
                f"mstl needs more than two full cycles of period {m} ({2 * m + 1} points), "
                f"got {len(y)}",
                field=f"model.periods[{i}]",
            )
    values = y.to_numpy(dtype=float)
    notes: list[FitWarning] = []
    if not np.all(np.isfinite(values)):
        values = interpolate_gaps(values)
        notes.append(FitWarning("interpolated", "missing values interpolated for MSTL"))
    seasonal = mstl_parts(values, periods).seasonal
    names = [f"period {m}" for m in periods]
    return pd.DataFrame(seasonal, index=y.index, columns=names), notes


def seasonal_spread(components: pd.DataFrame, periods: Sequence[int]) -> float:
    """Root of the summed mean square change of each component over its last two cycles."""
    total = 0.0
    for column, m in zip(components.columns, periods, strict=True):
        s = components[column].to_numpy(dtype=float)
        total += float(np.mean((s[-m:] - s[-2 * m : -m]) ** 2))
    return math.sqrt(total)


@dataclass
class MstlFitted:
    """The seasonal components, the fitted base on the adjusted series, and the history."""

    specification: MstlSpec
    y: pd.Series
    periods: tuple[int, ...]
    components: pd.DataFrame
    base: Any
    fit_seconds: float = 0.0
    warnings: list[FitWarning] = field(default_factory=list)
    spread: float | None = None

    def __post_init__(self) -> None:
        if self.spread is None:
            self.spread = seasonal_spread(self.components, self.periods)

    def _carried(self, index: pd.DatetimeIndex) -> np.ndarray:
        total = np.zeros(len(index))
        for column, m in zip(self.components.columns, self.periods, strict=True):
            total += carried_seasonal(self.components[column], m, index).to_numpy()
        return total

    def forecast(self, horizon: int, coverage: Sequence[float]) -> Forecast:
        """Base forecast of the adjusted series plus each component's last cycle, repeated."""
        inner = self.base.forecast(horizon, coverage)
        season = self._carried(inner.index)
        spread = float(self.spread or 0.0)
        point = inner.point + season
        intervals = []
        for i in inner.intervals:
            extra = (normal_quantile(i.coverage) * spread) ** 2
            low = np.sqrt((inner.point - i.lower) ** 2 + extra)
            high = np.sqrt((i.upper - inner.point) ** 2 + extra)
            intervals.append(Interval(i.coverage, point - low, point + high))
        return Forecast(inner.index, point, tuple(intervals))

    def fitted_values(self) -> pd.Series:
        """Base one-step fits on the adjusted series plus the seasonal components."""
        values = self.base.fitted_values().to_numpy(dtype=float) + self._carried(self.y.index)
        return pd.Series(values, index=self.y.index, name="fitted")

    def residuals(self) -> pd.Series:
        """Observed minus fitted."""
        resid = self.y.to_numpy(dtype=float) - self.fitted_values().to_numpy()
        return pd.Series(resid, index=self.y.index, name="residuals")

    def refilter(self, y: pd.Series) -> MstlFitted:
        """Components and base held fixed: no new decomposition, so nothing peeks ahead."""
        carried = pd.DataFrame(
            {
                column: carried_seasonal(self.components[column], m, y.index)
                for column, m in zip(self.components.columns, self.periods, strict=True)
            },
            index=y.index,
        )
        base = self.base.refilter(y - carried.sum(axis=1))
        return MstlFitted(self.specification, y, self.periods, carried, base, 0.0, [], self.spread)

    def describe(self) -> Description:
        """The base model's description under an ``MSTL (periods ...) then base`` label."""
        inner = self.base.describe()
        return replace(
            inner,
            family=MstlSpec.family,
            label=model_label("mstl", period=self.periods, base=inner.label),
            specification=as_dict(self.specification),
            fit_seconds=self.fit_seconds,
        )
