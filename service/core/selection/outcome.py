"""What automatic selection returns: the refitted model, its forecast and how it was chosen."""

from __future__ import annotations

from dataclasses import dataclass, field

import pandas as pd

from service.core.evaluation.calibration import Calibration
from service.core.evaluation.records import RankEntry
from service.core.models.base import Fitted, FitWarning, Forecast
from service.core.selection.candidates import CandidateSet, SeriesProfile


@dataclass(frozen=True)
class Selection:
    """The response's ``selection`` part: how the model was chosen and how it scored."""

    metric: str
    rule: str
    chosen: str
    ranking: tuple[RankEntry, ...]
    benchmark: str
    skill_over_naive: float | None
    horizon: int
    step: int
    origins: tuple[pd.Timestamp, ...]
    calibration: Calibration | None
    candidates: CandidateSet
    profile: SeriesProfile
    failures: tuple[tuple[str, str], ...] = ()
    observations_used: int = 0
    """How many of the latest points the candidates were estimated on (see MAX_HISTORY)."""
    candidate_seconds: tuple[tuple[str, float, float], ...] = ()
    """(label, fit seconds, re-filter + forecast seconds) per candidate; for logs only, kept
    out of responses so that identical requests give identical answers."""


@dataclass(frozen=True)
class AutoForecast:
    """The outcome of ``select``: the refitted model, its (calibrated) forecast and the story."""

    fitted: Fitted
    forecast: Forecast
    selection: Selection
    warnings: tuple[FitWarning, ...]
    seconds: dict[str, float] = field(default_factory=dict)
