"""Equal-weight combination of other specifications.

The point forecast is the mean of the members' points. The interval bounds are the means
of the members' bounds at each coverage level (common practice; simple and well
calibrated in forecasting competitions, though not the quantile of any mixture).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any, ClassVar

import numpy as np
import pandas as pd

from service.core.errors import SpecificationError, WindvaneError
from service.core.intervals import Interval
from service.core.models.base import (
    Description,
    Fitted,
    FitWarning,
    Forecast,
    as_dict,
    parameter,
)
from service.core.models.simple import ljung_box_summary, timed


@dataclass(frozen=True)
class CombinationSpec:
    """The equal-weight average of its members' forecasts."""

    family: ClassVar[str] = "combination"
    summary: ClassVar[str] = "Equal-weight average of the forecasts of other specifications."
    constraints: ClassVar[tuple[str, ...]] = (
        "members must list at least one specification.",
        "Interval bounds are the averages of the members' bounds at each coverage level.",
    )

    members: tuple[Any, ...] = parameter(
        (), "The specifications to average.", kind="specifications"
    )

    def fit(self, y: pd.Series, seasonal_period: int = 1) -> CombinationFitted:
        """Fit every member on the same history; a member's error names its position."""
        if not self.members:
            raise SpecificationError("members must list at least one specification", "model")
        start = timed()
        fitted = []
        for i, member in enumerate(self.members):
            try:
                fitted.append(member.fit(y, seasonal_period))
            except WindvaneError as exc:
                raise _placed(exc, i) from exc
        notes = [
            FitWarning(w.code, f"member {i}: {w.message}")
            for i, f in enumerate(fitted)
            for w in f.warnings
        ]
        return CombinationFitted(self, y, seasonal_period, fitted, timed() - start, notes)


def _placed(exc: WindvaneError, position: int) -> WindvaneError:
    """Move a member's 'model.x' fields under 'model.members[i]'."""
    moved = []
    for p in exc.problems:
        name = p.field
        if name == "model" or name.startswith("model."):
            name = f"model.members[{position}]" + name[len("model") :]
        moved.append(type(p)(name, p.message))
    return type(exc)(exc.message, problems=moved)


@dataclass
class CombinationFitted:
    """The fitted members, averaged at forecast time."""

    specification: CombinationSpec
    y: pd.Series
    seasonal_period: int
    members: list[Fitted]
    fit_seconds: float = 0.0
    warnings: list[FitWarning] = field(default_factory=list)

    @property
    def label(self) -> str:
        """'Combination(label, label, ...)'."""
        return "Combination(" + ", ".join(m.describe().label for m in self.members) + ")"

    def forecast(self, horizon: int, coverage: Sequence[float]) -> Forecast:
        """Mean of the points; mean of the bounds per coverage level."""
        parts = [m.forecast(horizon, coverage) for m in self.members]
        point = np.mean([p.point for p in parts], axis=0)
        intervals = tuple(
            Interval(
                float(c),
                np.mean([p.intervals[k].lower for p in parts], axis=0),
                np.mean([p.intervals[k].upper for p in parts], axis=0),
            )
            for k, c in enumerate(coverage)
        )
        return Forecast(parts[0].index, point, intervals)

    def fitted_values(self) -> pd.Series:
        """Mean of the members' one-step fits (NaN where any member has none)."""
        stacked = np.vstack([m.fitted_values().to_numpy(dtype=float) for m in self.members])
        return pd.Series(stacked.mean(axis=0), index=self.y.index, name="fitted")

    def residuals(self) -> pd.Series:
        """Observed minus the combined one-step fit."""
        return pd.Series(
            self.y.to_numpy(dtype=float) - self.fitted_values().to_numpy(),
            index=self.y.index,
            name="residuals",
        )

    def refilter(self, y: pd.Series) -> CombinationFitted:
        """Every member re-filtered with its own parameters held fixed."""
        members = [m.refilter(y) for m in self.members]
        return CombinationFitted(self.specification, y, self.seasonal_period, members)

    def describe(self) -> Description:
        """The members' labels and parameters (prefixed by position); no joint likelihood."""
        described = [m.describe() for m in self.members]
        params = {
            f"members[{i}].{name}": value
            for i, d in enumerate(described)
            for name, value in d.parameters.items()
        }
        resid = self.residuals().to_numpy()
        resid = resid[np.isfinite(resid)]
        return Description(
            family="combination",
            label="Combination(" + ", ".join(d.label for d in described) + ")",
            specification=as_dict(self.specification),
            parameters=params,
            information_criteria={},
            residual_variance=float(np.mean(resid**2)) if resid.size else None,
            residual_diagnostics={
                **ljung_box_summary(resid, self.seasonal_period),
                "members": [d.label for d in described],
                "interval_method": "average of the members' bounds",
            },
            observations=len(self.y),
            fit_seconds=self.fit_seconds,
        )
