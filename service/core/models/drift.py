"""The drift benchmark: the line from the first to the last observation, extended."""

from __future__ import annotations

from dataclasses import dataclass
from typing import ClassVar

import numpy as np
import pandas as pd

from service.core.errors import FitError
from service.core.models.labels import model_label
from service.core.models.naive import lagged
from service.core.models.simple import SimpleFitted, last_observed, residual_sigma, timed


@dataclass(frozen=True)
class DriftSpec:
    """Naive plus the average change per step; sd = σ̂√(h(1 + h/(T−1)))."""

    family: ClassVar[str] = "drift"
    summary: ClassVar[str] = "The last observation plus the average change per step so far."

    def fit(self, y: pd.Series, seasonal_period: int = 1) -> DriftFitted:
        start = timed()
        values = y.to_numpy(dtype=float)
        steps = values - lagged(values, 1)
        usable = steps[np.isfinite(steps)]
        if usable.size < 2:
            raise FitError(
                "drift needs at least three observations with two changes", field="series.values"
            )
        slope = float(usable.mean())
        sigma = residual_sigma(steps - slope, n_parameters=1)
        n = int(np.isfinite(values).sum())
        return DriftFitted(self, y, seasonal_period, sigma, {"drift": slope}, n, timed() - start)


class DriftFitted(SimpleFitted):
    """Fitted drift benchmark; T is the estimation sample, held fixed on re-filtering."""

    label = model_label("drift")

    def _steps(self, horizon: int) -> np.ndarray:
        """Steps from the last observation: missing values kept at the end widen the gap."""
        finite = np.flatnonzero(np.isfinite(self.y.to_numpy(dtype=float)))
        gap = len(self.y) - 1 - int(finite[-1])
        return np.arange(1, horizon + 1, dtype=float) + gap

    def _point(self, horizon: int) -> np.ndarray:
        h = self._steps(horizon)
        return last_observed(self.y.to_numpy(dtype=float)) + self.parameters["drift"] * h

    def _sd(self, horizon: int) -> np.ndarray:
        h = self._steps(horizon)
        return self.sigma * np.sqrt(h * (1.0 + h / (self.n_estimated - 1)))

    def _fitted_array(self) -> np.ndarray:
        return lagged(self.y.to_numpy(dtype=float), 1) + self.parameters["drift"]
