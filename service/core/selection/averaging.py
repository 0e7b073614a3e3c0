"""Weighted combinations chosen by the selection: of backtests and of fitted models.

Points are averaged with the weights; interval bounds are averaged too, which is quantile
averaging (Lichtendahl, Grushka-Cockayne & Winkler 2013): it keeps the members' shapes and
the calibration step corrects the width afterwards. No weights means equal weights.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd

from service.core.evaluation.records import ModelBacktest, OriginForecast
from service.core.models.base import Description, Fitted, FitWarning, Forecast
from service.core.models.intervals import Interval
from service.core.models.labels import model_label


def normalised(weights: Sequence[float] | None, count: int) -> np.ndarray:
    """``weights`` scaled to sum to one; equal weights when None or empty."""
    if not weights:
        return np.full(count, 1.0 / count)
    w = np.asarray(weights, dtype=float)
    return w / w.sum()


def combine(
    members: Sequence[ModelBacktest],
    label: str | None = None,
    weights: Sequence[float] | None = None,
) -> ModelBacktest:
    """Weighted combination of members' backtests: points and bounds averaged per origin.

    Averaging interval bounds is quantile averaging (Lichtendahl, Grushka-Cockayne & Winkler 2013).
    """
    first = members[0]
    w = normalised(weights, len(members))
    forecasts = []
    for k, f in enumerate(first.forecasts):
        parts = [m.forecasts[k] for m in members]
        forecasts.append(
            OriginForecast(
                origin=f.origin,
                actual=f.actual,
                point=w @ np.array([p.point for p in parts]),
                lower={v: w @ np.array([p.lower[v] for p in parts]) for v in first.levels},
                upper={v: w @ np.array([p.upper[v] for p in parts]) for v in first.levels},
                scale=f.scale,
            )
        )
    specification: dict[str, Any] = {
        "family": "combination",
        "members": [m.specification for m in members],
    }
    if weights:
        specification["weights"] = [float(x) for x in w]
    return ModelBacktest(
        specification,
        label or model_label("combination", members=len(members), weighted=bool(weights)),
        tuple(forecasts),
        first.levels,
        sum(m.fit_seconds for m in members),
        sum(m.refilter_seconds for m in members),
    )


@dataclass(frozen=True)
class _CombinationSpec:
    """The combination the selection chose (members already specified, weights normalised)."""

    members: tuple[Any, ...]
    weights: tuple[float, ...]
    family = "combination"


@dataclass
class CombinedFitted:
    """Weighted mean of fitted members: points and interval bounds averaged per step.

    Used where the members need different seasonal periods (STL beside non-seasonal models),
    which the registry's combination family, fitted with one period, cannot express.
    """

    members: tuple[Fitted, ...]
    label: str
    weights: tuple[float, ...] = ()
    warnings: list[FitWarning] = field(default_factory=list)

    def __post_init__(self) -> None:
        self._w = normalised(self.weights, len(self.members))
        self.specification: Any = _CombinationSpec(
            tuple(m.specification for m in self.members), tuple(float(x) for x in self._w)
        )
        for m in self.members:
            self.warnings.extend(w for w in m.warnings if w not in self.warnings)

    def forecast(self, horizon: int, coverage: Sequence[float]) -> Forecast:
        """Weighted mean of the members' points and of their bounds (quantile averaging)."""
        parts = [m.forecast(horizon, coverage) for m in self.members]
        w = self._w
        point = w @ np.array([p.point for p in parts])
        intervals = tuple(
            Interval(
                iv.coverage,
                w @ np.array([p.intervals[i].lower for p in parts]),
                w @ np.array([p.intervals[i].upper for p in parts]),
            )
            for i, iv in enumerate(parts[0].intervals)
        )
        return Forecast(parts[0].index, point, intervals)

    def describe(self) -> Description:
        """The members' descriptions nested under the combination."""
        described = [m.describe() for m in self.members]
        return Description(
            family="combination",
            label=self.label,
            specification={
                "family": "combination",
                "members": [d.specification for d in described],
                "weights": [float(x) for x in self._w],
            },
            parameters={f"weight[{i}]": float(x) for i, x in enumerate(self._w)},
            information_criteria={},
            residual_variance=None,
            residual_diagnostics={"members": [d.label for d in described]},
            observations=max(d.observations for d in described),
            fit_seconds=sum(d.fit_seconds for d in described),
        )

    def refilter(self, y: pd.Series) -> CombinedFitted:
        """Every member re-filtered on ``y``."""
        return CombinedFitted(tuple(m.refilter(y) for m in self.members), self.label, self.weights)

    def fitted_values(self) -> pd.Series:
        """Weighted mean of the members' one-step fits."""
        stacked = pd.concat([m.fitted_values() for m in self.members], axis=1)
        return (stacked * self._w).sum(axis=1, min_count=len(self.members))

    def residuals(self) -> pd.Series:
        """Observed minus the combined fit."""
        first = self.members[0].residuals() + self.members[0].fitted_values()
        return (first - self.fitted_values()).rename("residuals")
