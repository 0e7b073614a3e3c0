"""The seasonal naive benchmark: each future value repeats the same season of the last cycle."""

from __future__ import annotations

from dataclasses import dataclass
from typing import ClassVar

import numpy as np
import pandas as pd

from service.core.errors import FitError
from service.core.models.labels import model_label
from service.core.models.naive import lagged
from service.core.models.simple import SimpleFitted, residual_sigma, timed


@dataclass(frozen=True)
class SeasonalNaiveSpec:
    """Forecast the value one season earlier; sd = σ̂√(k+1), k = ⌊(h−1)/m⌋."""

    family: ClassVar[str] = "seasonal_naive"
    summary: ClassVar[str] = "Every future value repeats the value one seasonal period earlier."

    def fit(self, y: pd.Series, seasonal_period: int = 1) -> SeasonalNaiveFitted:
        start = timed()
        m = seasonal_period
        if m < 1:
            raise FitError(
                "seasonal_naive needs a seasonal period >= 1", field="series.seasonal_period"
            )
        if len(y) <= m:
            raise FitError(
                f"seasonal_naive needs more than one full season ({m} points), got {len(y)}",
                field="series.values",
            )
        values = y.to_numpy(dtype=float)
        sigma = residual_sigma(values - lagged(values, m), n_parameters=0)
        n = int(np.isfinite(values).sum())
        return SeasonalNaiveFitted(self, y, m, sigma, {}, n, timed() - start)


class SeasonalNaiveFitted(SimpleFitted):
    """Fitted seasonal naive benchmark."""

    @property
    def label(self) -> str:  # type: ignore[override]
        return model_label("seasonal_naive", period=self.seasonal_period)

    def _last_cycle(self) -> np.ndarray:
        values = self.y.to_numpy(dtype=float)
        m = self.seasonal_period
        cycle = values[-m:].copy()
        # A missing value kept as NaN falls back to the same season one cycle earlier.
        for i in np.flatnonzero(~np.isfinite(cycle)):
            pos = values.size - m + i - m
            while pos >= 0 and not np.isfinite(values[pos]):
                pos -= m
            cycle[i] = values[pos] if pos >= 0 else np.nanmean(values)
        return cycle

    def _point(self, horizon: int) -> np.ndarray:
        cycle = self._last_cycle()
        return cycle[np.arange(horizon) % self.seasonal_period]

    def _sd(self, horizon: int) -> np.ndarray:
        k = np.floor((np.arange(1, horizon + 1) - 1) / self.seasonal_period)
        return self.sigma * np.sqrt(k + 1.0)

    def _fitted_array(self) -> np.ndarray:
        return lagged(self.y.to_numpy(dtype=float), self.seasonal_period)
