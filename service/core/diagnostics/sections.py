"""The sections of a diagnostics report, each a result or a NotApplicable saying why not."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import pandas as pd

from service.core.applicability import NotApplicable
from service.core.diagnostics.autocorrelation import Correlogram
from service.core.diagnostics.cycles import MATTERS, SeveralPeriods
from service.core.diagnostics.differencing import DifferencingOrders
from service.core.diagnostics.random_walk import RandomWalkVerdict
from service.core.diagnostics.seasonality import CandidatePeriod, Components, Outliers
from service.core.diagnostics.stationarity import Stationarity


@dataclass(frozen=True)
class Summary:
    """Counts, span and moments of the observed values."""

    length: int
    missing: int
    first: pd.Timestamp | None
    last: pd.Timestamp | None
    frequency: str
    seasonal_period: int
    mean: float | None
    standard_deviation: float | None
    minimum: float | None
    maximum: float | None
    share_of_zeros: float | None


@dataclass(frozen=True)
class Seasonality:
    """Strengths of trend and season, candidate periods and (on request) the components."""

    method: str
    seasonal_period: int
    trend_strength: float
    seasonal_strength: float | NotApplicable
    candidates: tuple[CandidatePeriod, ...]
    settings: dict[str, Any]
    components: Components | None
    several: SeveralPeriods | None = None
    """With two or more seasonal periods: their MSTL strengths (``diagnostics.cycles``)."""

    @property
    def periods_that_matter(self) -> tuple[float, ...]:
        """The periods strong enough to model: by MSTL strength with several periods, else the
        one period when its STL strength reaches the same threshold."""
        if self.several is not None:
            return self.several.periods_that_matter
        strong = isinstance(self.seasonal_strength, float) and self.seasonal_strength >= MATTERS
        return (float(self.seasonal_period),) if strong else ()


@dataclass(frozen=True)
class Diagnostics:
    """Every section of the diagnostics response, each a result or a NotApplicable."""

    summary: Summary
    stationarity: Stationarity | NotApplicable
    differencing: DifferencingOrders | NotApplicable
    autocorrelation: Correlogram | NotApplicable
    differenced_autocorrelation: Correlogram | NotApplicable
    differenced_series: str
    random_walk: RandomWalkVerdict | NotApplicable
    seasonality: Seasonality | NotApplicable
    outliers: Outliers | NotApplicable
    notes: tuple[str, ...]
    findings: tuple[str, ...] = ()
    """Plain sentences a reporting system can show as they are (``findings.findings``)."""

    @property
    def is_random_walk(self) -> bool:
        """True only when the random-walk verdict applies and says so (for model selection)."""
        return isinstance(self.random_walk, RandomWalkVerdict) and self.random_walk.is_random_walk
