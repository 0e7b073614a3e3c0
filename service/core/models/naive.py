"""The naive benchmark: every future value is the last observation (the random-walk forecast)."""

from __future__ import annotations

from dataclasses import dataclass
from typing import ClassVar

import numpy as np
import pandas as pd

from service.core.models.labels import model_label
from service.core.models.simple import SimpleFitted, last_observed, residual_sigma, timed


def lagged(values: np.ndarray, lag: int) -> np.ndarray:
    """values shifted forward by ``lag`` steps, NaN where no earlier value exists."""
    out = np.full(values.shape, np.nan)
    if lag < values.size:
        out[lag:] = values[:-lag]
    return out


@dataclass(frozen=True)
class NaiveSpec:
    """Forecast the last observed value; sd grows with √h."""

    family: ClassVar[str] = "naive"
    summary: ClassVar[str] = "Every future value equals the last observation."

    def fit(self, y: pd.Series, seasonal_period: int = 1) -> NaiveFitted:
        start = timed()
        values = y.to_numpy(dtype=float)
        sigma = residual_sigma(values - lagged(values, 1), n_parameters=0)
        n = int(np.isfinite(values).sum())
        return NaiveFitted(self, y, seasonal_period, sigma, {}, n, timed() - start)


class NaiveFitted(SimpleFitted):
    """Fitted naive benchmark: sd = σ̂√h."""

    label = model_label("naive")

    def _point(self, horizon: int) -> np.ndarray:
        return np.full(horizon, last_observed(self.y.to_numpy(dtype=float)))

    def _sd(self, horizon: int) -> np.ndarray:
        return self.sigma * np.sqrt(np.arange(1, horizon + 1))

    def _fitted_array(self) -> np.ndarray:
        return lagged(self.y.to_numpy(dtype=float), 1)
