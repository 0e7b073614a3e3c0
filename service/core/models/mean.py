"""The mean benchmark: every future value is the historical mean (FPP3 §5.2)."""

from __future__ import annotations

from dataclasses import dataclass
from typing import ClassVar

import numpy as np
import pandas as pd

from service.core.models.labels import model_label
from service.core.models.simple import SimpleFitted, residual_sigma, timed


@dataclass(frozen=True)
class MeanSpec:
    """Forecast the historical mean; intervals widen by the estimation error of the mean."""

    family: ClassVar[str] = "mean"
    summary: ClassVar[str] = "Every future value equals the mean of the history."

    def fit(self, y: pd.Series, seasonal_period: int = 1) -> MeanFitted:
        start = timed()
        values = y.to_numpy(dtype=float)
        level = float(np.nanmean(values))
        sigma = residual_sigma(values - level, n_parameters=1)
        n = int(np.isfinite(values).sum())
        return MeanFitted(self, y, seasonal_period, sigma, {"mean": level}, n, timed() - start)


class MeanFitted(SimpleFitted):
    """Fitted mean benchmark: sd = σ̂√(1 + 1/T)."""

    label = model_label("mean")

    def _point(self, horizon: int) -> np.ndarray:
        return np.full(horizon, self.parameters["mean"])

    def _sd(self, horizon: int) -> np.ndarray:
        return np.full(horizon, self.sigma * np.sqrt(1.0 + 1.0 / self.n_estimated))

    def _fitted_array(self) -> np.ndarray:
        return np.full(len(self.y), self.parameters["mean"])
