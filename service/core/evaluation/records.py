"""What a backtest records: each origin's forecast beside the actuals, the scores per step
and overall, and the ranking of the models by a metric."""

from __future__ import annotations

import dataclasses
from collections.abc import Iterable, Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd

from service.core.evaluation.scoring import interval_scores, smape
from service.core.models.base import FitWarning


@dataclass(frozen=True)
class OriginForecast:
    """One origin's forecast beside what happened, with the MASE scale of its history."""

    origin: pd.Timestamp
    actual: np.ndarray
    point: np.ndarray
    lower: dict[float, np.ndarray]
    upper: dict[float, np.ndarray]
    scale: float


@dataclass(frozen=True)
class Scores:
    """Accuracy measures, with coverage and scaled interval score per coverage level."""

    mae: float
    rmse: float
    mase: float
    smape: float
    coverage: dict[float, float]
    msis: dict[float, float]


@dataclass(frozen=True)
class StepScores(Scores):
    """Accuracy at one horizon step (1-based), averaged over the origins."""

    step: int


def _finite_mean(values: Iterable[float]) -> float:
    arr = np.array(list(values), dtype=float)
    arr = arr[np.isfinite(arr)]
    return float(arr.mean()) if arr.size else float("nan")


@dataclass(frozen=True)
class ModelBacktest:
    """One specification's rolling-origin record; ``failure`` says why it has no forecasts."""

    specification: dict[str, Any]
    label: str
    forecasts: tuple[OriginForecast, ...]
    levels: tuple[float, ...]
    fit_seconds: float
    refilter_seconds: float
    warnings: tuple[FitWarning, ...] = ()
    failure: str | None = None
    resolved: Any = None
    """The complete specification the family's own search settled on (the structure scored)."""
    delivered: Any = None
    """With ``Task.settle``: the model fitted on the whole series with the structure scored
    here, the one a forecast delivers."""

    @property
    def ok(self) -> bool:
        """True when every origin produced a finite forecast."""
        return self.failure is None and bool(self.forecasts)

    def at(self, origins: set[pd.Timestamp]) -> ModelBacktest:
        """The same record restricted to the given origins."""
        kept = tuple(f for f in self.forecasts if f.origin in origins)
        return dataclasses.replace(self, forecasts=kept)

    def errors(self) -> np.ndarray:
        """Actual minus point, shape (origins, horizon)."""
        return np.array([f.actual - f.point for f in self.forecasts])

    def scaled_abs_errors(self) -> np.ndarray:
        """|actual − point| / MASE scale of each origin's history, shape (origins, horizon)."""
        return np.array([np.abs(f.actual - f.point) / f.scale for f in self.forecasts])

    def steps(self) -> tuple[StepScores, ...]:
        """Per-step MAE, RMSE, MASE, sMAPE, coverage and MSIS over the origins."""
        if not self.ok:
            return ()
        e = self.errors()
        scaled = self.scaled_abs_errors()
        out = []
        for s in range(e.shape[1]):
            actual = np.array([f.actual[s] for f in self.forecasts])
            point = np.array([f.point[s] for f in self.forecasts])
            cov: dict[float, float] = {}
            score: dict[float, float] = {}
            for level in self.levels:
                lo = np.array([f.lower[level][s] for f in self.forecasts])
                hi = np.array([f.upper[level][s] for f in self.forecasts])
                scales = np.array([f.scale for f in self.forecasts])
                cov[level] = _nanmean(((actual >= lo) & (actual <= hi)).astype(float), actual)
                score[level] = _nanmean(interval_scores(actual, lo, hi, level) / scales, actual)
            out.append(
                StepScores(
                    step=s + 1,
                    mae=_nanmean(np.abs(e[:, s]), actual),
                    rmse=float(np.sqrt(_nanmean(e[:, s] ** 2, actual))),
                    mase=_nanmean(scaled[:, s], actual),
                    smape=smape(actual, point),
                    coverage=cov,
                    msis=score,
                )
            )
        return tuple(out)

    def overall(self) -> Scores | None:
        """The step scores averaged over the steps; None when the model has no forecasts."""
        steps = self.steps()
        if not steps:
            return None
        return Scores(
            mae=_finite_mean(s.mae for s in steps),
            rmse=_finite_mean(s.rmse for s in steps),
            mase=_finite_mean(s.mase for s in steps),
            smape=_finite_mean(s.smape for s in steps),
            coverage={v: _finite_mean(s.coverage[v] for s in steps) for v in self.levels},
            msis={v: _finite_mean(s.msis[v] for s in steps) for v in self.levels},
        )

    def score(self, metric: str) -> float:
        """The model's overall score by ``metric``: mean over origins and steps (inf if failed)."""
        if not self.ok:
            return float("inf")
        if metric == "mase":
            value = _nanmean(self.scaled_abs_errors().ravel(), self.errors().ravel())
        elif metric == "mae":
            value = _nanmean(np.abs(self.errors()).ravel(), self.errors().ravel())
        elif metric == "rmse":
            value = float(np.sqrt(_nanmean(self.errors().ravel() ** 2, self.errors().ravel())))
        else:
            actual = np.concatenate([f.actual for f in self.forecasts])
            point = np.concatenate([f.point for f in self.forecasts])
            value = smape(actual, point)
        return value if np.isfinite(value) else float("inf")


def _nanmean(values: np.ndarray, actual: np.ndarray) -> float:
    """Mean over entries whose actual value is known; NaN if none is."""
    keep = np.isfinite(np.asarray(actual, dtype=float)) & np.isfinite(values)
    return float(np.mean(values[keep])) if keep.any() else float("nan")


@dataclass(frozen=True)
class RankEntry:
    """A model's place in the ranking by the chosen metric."""

    label: str
    specification: dict[str, Any]
    score: float


@dataclass(frozen=True)
class BacktestReport:
    """POST /v1/backtests: every model's per-step scores and a ranking by ``metric``."""

    metric: str
    horizon: int
    step: int
    origins: tuple[pd.Timestamp, ...]
    coverage: tuple[float, ...]
    models: tuple[ModelBacktest, ...]
    ranking: tuple[RankEntry, ...] = field(default=())
    estimation: str = "first_origin"
    """Where each model was estimated: ``backtest.ESTIMATIONS``."""


def rank(models: Sequence[ModelBacktest], metric: str) -> tuple[RankEntry, ...]:
    """Working models by ascending score; ties keep the input order (deterministic)."""
    scored = [(m.score(metric), i, m) for i, m in enumerate(models) if m.ok]
    scored.sort(key=lambda t: (t[0], t[1]))
    return tuple(RankEntry(m.label, m.specification, s) for s, _, m in scored)
