"""Equal-weight combinations chosen by the selection: of backtests and of fitted models.

Points are averaged; interval bounds are averaged too, which is quantile averaging
(Lichtendahl, Grushka-Cockayne & Winkler 2013): it keeps the members' shapes and the
calibration step corrects the width afterwards.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd

from service.core.backtest import ModelBacktest, OriginForecast
from service.core.intervals import Interval
from service.core.models.base import Description, Fitted, FitWarning, Forecast


def combine(members: Sequence[ModelBacktest], label: str | None = None) -> ModelBacktest:
    """Equal-weight combination of members' backtests: points and bounds averaged per origin.

    Averaging interval bounds is quantile averaging (Lichtendahl, Grushka-Cockayne & Winkler 2013).
    """
    first = members[0]
    forecasts = []
    for k, f in enumerate(first.forecasts):
        parts = [m.forecasts[k] for m in members]
        forecasts.append(
            OriginForecast(
                origin=f.origin,
                actual=f.actual,
                point=np.mean([p.point for p in parts], axis=0),
                lower={v: np.mean([p.lower[v] for p in parts], axis=0) for v in first.levels},
                upper={v: np.mean([p.upper[v] for p in parts], axis=0) for v in first.levels},
                scale=f.scale,
            )
        )
    return ModelBacktest(
        {"family": "combination", "members": [m.specification for m in members]},
        label or "Combination(" + ", ".join(m.label for m in members) + ")",
        tuple(forecasts),
        first.levels,
        sum(m.fit_seconds for m in members),
        sum(m.refilter_seconds for m in members),
    )


@dataclass(frozen=True)
class _CombinationSpec:
    """The equal-weight combination the selection chose (members already specified)."""

    members: tuple[Any, ...]
    family = "combination"


@dataclass
class CombinedFitted:
    """Equal-weight mean of fitted members: points and interval bounds averaged per step."""

    members: tuple[Fitted, ...]
    label: str
    warnings: list[FitWarning] = field(default_factory=list)

    def __post_init__(self) -> None:
        self.specification: Any = _CombinationSpec(tuple(m.specification for m in self.members))
        for m in self.members:
            self.warnings.extend(w for w in m.warnings if w not in self.warnings)

    def forecast(self, horizon: int, coverage: Sequence[float]) -> Forecast:
        """Mean of the members' points and of their bounds (quantile averaging)."""
        parts = [m.forecast(horizon, coverage) for m in self.members]
        point = np.mean([p.point for p in parts], axis=0)
        intervals = tuple(
            Interval(
                iv.coverage,
                np.mean([p.intervals[i].lower for p in parts], axis=0),
                np.mean([p.intervals[i].upper for p in parts], axis=0),
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
            },
            parameters={f"weight[{i}]": 1.0 / len(described) for i in range(len(described))},
            information_criteria={},
            residual_variance=None,
            residual_diagnostics={"members": [d.label for d in described]},
            observations=max(d.observations for d in described),
            fit_seconds=sum(d.fit_seconds for d in described),
        )

    def refilter(self, y: pd.Series) -> CombinedFitted:
        """Every member re-filtered on ``y``."""
        return CombinedFitted(tuple(m.refilter(y) for m in self.members), self.label)

    def fitted_values(self) -> pd.Series:
        """Mean of the members' one-step fits."""
        return pd.concat([m.fitted_values() for m in self.members], axis=1).mean(axis=1)

    def residuals(self) -> pd.Series:
        """Observed minus the combined fit."""
        first = self.members[0].residuals() + self.members[0].fitted_values()
        return (first - self.fitted_values()).rename("residuals")
