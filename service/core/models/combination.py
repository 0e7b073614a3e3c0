"""Weighted (by default equal-weight) combination of other specifications.

The point forecast is the weighted mean of the members' points. The interval bounds are the
weighted means of the members' bounds at each coverage level (quantile averaging: common
practice, simple and well calibrated in forecasting competitions, though not the quantile
of any mixture). Weights are relative: they are normalised to sum to one.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field, replace
from typing import Any, ClassVar

import numpy as np
import pandas as pd

from service.core.errors import SpecificationError, WindvaneError
from service.core.models.base import (
    Description,
    Fitted,
    FitWarning,
    Forecast,
    as_dict,
    origin_forecasts,
    parameter,
    residuals_from,
)
from service.core.models.intervals import Interval
from service.core.models.labels import model_label
from service.core.models.simple import ljung_box_summary, timed


@dataclass(frozen=True)
class CombinationSpec:
    """The weighted (by default equal-weight) average of its members' forecasts."""

    family: ClassVar[str] = "combination"
    summary: ClassVar[str] = (
        "Weighted (by default equal-weight) average of the forecasts of other specifications."
    )
    constraints: ClassVar[tuple[str, ...]] = (
        "members must list at least one specification.",
        "weights, when given, has one non-negative number per member and a positive sum.",
        "Interval bounds are the weighted averages of the members' bounds at each level.",
    )

    members: tuple[Any, ...] = parameter(
        (), "The specifications to average.", kind="specifications"
    )
    weights: tuple[float, ...] = parameter(
        (),
        "Relative weight of each member, normalised to sum to one; empty for equal weights.",
        kind="numbers",
        minimum=0,
    )

    def __post_init__(self) -> None:
        if self.members:
            self.normalised_weights()

    def normalised_weights(self) -> np.ndarray:
        """One weight per member summing to one; checks the count and the sum."""
        count = len(self.members)
        if not self.weights:
            return np.full(count, 1.0 / max(count, 1))
        w = np.asarray(self.weights, dtype=float)
        if w.size != count:
            raise SpecificationError(
                f"weights has {w.size} entries for {count} members", "model.weights"
            )
        if not np.all(np.isfinite(w)) or np.any(w < 0) or not np.any(w > 0):
            raise SpecificationError(
                "weights must be non-negative with a positive sum", "model.weights"
            )
        # Scaled by the largest first: [1e308, 1e308] summed to inf and gave zero weights.
        scaled = w / w.max()
        return np.asarray(scaled / scaled.sum())

    def fit(self, y: pd.Series, seasonal_period: int = 1) -> CombinationFitted:
        """Fit every member on the same history; a member's error names its position."""
        if not self.members:
            raise SpecificationError("members must list at least one specification", "model")
        self.normalised_weights()
        start = timed()
        fitted = []
        for i, member in enumerate(self.members):
            try:
                fitted.append(member.fit(y, seasonal_period))
            except WindvaneError as exc:
                raise exc.moved_under(f"model.members[{i}]") from exc
        return CombinationFitted.of(self, y, seasonal_period, fitted, timed() - start)


@dataclass
class CombinationFitted:
    """The fitted members, averaged at forecast time."""

    specification: CombinationSpec
    y: pd.Series
    seasonal_period: int
    members: list[Fitted]
    fit_seconds: float = 0.0
    warnings: list[FitWarning] = field(default_factory=list)

    @classmethod
    def of(
        cls,
        spec: CombinationSpec,
        y: pd.Series,
        seasonal_period: int,
        members: list[Fitted],
        fit_seconds: float,
    ) -> CombinationFitted:
        """Fitted members combined, their warnings kept with the member's position."""
        notes = [
            FitWarning(w.code, f"member {i}: {w.message}")
            for i, f in enumerate(members)
            for w in f.warnings
        ]
        return cls(spec, y, seasonal_period, members, fit_seconds, notes)

    @property
    def label(self) -> str:
        """'(weighted) combination of N models'; the members' labels are in the description."""
        weighted = bool(self.specification.weights)
        return model_label("combination", members=len(self.members), weighted=weighted)

    def forecast(self, horizon: int, coverage: Sequence[float]) -> Forecast:
        """Weighted mean of the points; weighted mean of the bounds per coverage level."""
        return self._combined([m.forecast(horizon, coverage) for m in self.members], coverage)

    def origin_forecasts(
        self, y: pd.Series, origins: Sequence[int], horizon: int, coverage: Sequence[float]
    ) -> list[Forecast]:
        """``refilter(y.iloc[:o]).forecast(horizon, coverage)`` for every origin ``o``, each
        member forecasting from all the origins at once."""
        parts = [origin_forecasts(m, y, origins, horizon, coverage) for m in self.members]
        return [self._combined([p[k] for p in parts], coverage) for k in range(len(origins))]

    def _combined(self, parts: Sequence[Forecast], coverage: Sequence[float]) -> Forecast:
        w = self.specification.normalised_weights()
        point = w @ np.array([p.point for p in parts])
        intervals = tuple(
            Interval(
                float(c),
                w @ np.array([p.intervals[k].lower for p in parts]),
                w @ np.array([p.intervals[k].upper for p in parts]),
            )
            for k, c in enumerate(coverage)
        )
        return Forecast(parts[0].index, point, intervals)

    def fitted_values(self) -> pd.Series:
        """Weighted mean of the members' one-step fits (NaN where any member has none)."""
        w = self.specification.normalised_weights()
        stacked = np.vstack([m.fitted_values().to_numpy(dtype=float) for m in self.members])
        return pd.Series(w @ stacked, index=self.y.index, name="fitted")

    def residuals(self) -> pd.Series:
        """Observed minus the combined one-step fit."""
        return residuals_from(self.y, self.fitted_values())

    def refilter(self, y: pd.Series) -> CombinationFitted:
        """Every member re-filtered with its own parameters held fixed."""
        members = [m.refilter(y) for m in self.members]
        return CombinationFitted(self.specification, y, self.seasonal_period, members)

    def describe(self) -> Description:
        """The members' labels and parameters (prefixed by position); no joint likelihood."""
        described = [m.describe() for m in self.members]
        weights = self.specification.normalised_weights()
        params = {f"weight[{i}]": float(w) for i, w in enumerate(weights)}
        params.update(
            {
                f"members[{i}].{name}": value
                for i, d in enumerate(described)
                for name, value in d.parameters.items()
            }
        )
        resid = self.residuals().to_numpy()
        resid = resid[np.isfinite(resid)]
        return Description(
            family="combination",
            label=self.label,
            specification=as_dict(self.specification),
            parameters=params,
            information_criteria={},
            residual_variance=float(np.mean(resid**2)) if resid.size else None,
            residual_diagnostics=replace(
                ljung_box_summary(resid, self.seasonal_period),
                members=tuple(d.label for d in described),
                interval_method="weighted average of the members' bounds",
            ),
            observations=len(self.y),
            fit_seconds=self.fit_seconds,
        )
