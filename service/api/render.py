"""Core results as response bodies: the wire format, in JSON-ready values (finite floats or
null, ISO 8601 strings); the response schemas in ``api/schemas`` describe every field."""

from __future__ import annotations

import dataclasses
from typing import Any

import numpy as np
import pandas as pd

from service.core.applicability import plain_float, plain_floats
from service.core.data.frequency import frequency_name
from service.core.errors import FitError
from service.core.evaluation.calibration import Calibration
from service.core.evaluation.records import BacktestReport, ModelBacktest, RankEntry, Scores
from service.core.models.base import Description, FitWarning, Forecast, ResidualChecks, as_dict
from service.core.selection.outcome import Selection
from service.runtime.jobs import ForecastAnswer


def timestamps(index: pd.DatetimeIndex) -> list[str]:
    """ISO 8601 strings; dates alone when every stamp is a naive midnight."""
    if index.tz is None and (index.normalize() == index).all():
        return [t.strftime("%Y-%m-%d") for t in index]
    return [t.isoformat() for t in index]


def floats(values: Any) -> list[float | None]:
    """A list of floats with non-finite entries as null (JSON has no NaN)."""
    return plain_floats(np.asarray(values, dtype=float))


def plain(value: Any) -> Any:
    """Recursively convert numpy scalars, arrays, tuples and dataclasses to JSON values."""
    if dataclasses.is_dataclass(value) and not isinstance(value, type):
        return {f.name: plain(getattr(value, f.name)) for f in dataclasses.fields(value)}
    if isinstance(value, dict):
        return {str(k): plain(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [plain(v) for v in value]
    if isinstance(value, np.ndarray):
        return [plain(v) for v in value.tolist()]
    if isinstance(value, (np.bool_, bool)):
        return bool(value)
    if isinstance(value, (np.integer,)):
        return int(value)
    if isinstance(value, (float, np.floating)):
        return plain_float(value)
    if isinstance(value, pd.Timestamp):
        return value.isoformat()
    return value


def forecast_body(forecast: Forecast) -> dict[str, Any]:
    """frequency, timestamps, point and intervals of a forecast."""
    freq = forecast.index.freq
    return {
        "frequency": frequency_name(freq) if freq is not None else None,
        "timestamps": timestamps(forecast.index),
        "point": floats(forecast.point),
        "intervals": [
            {"coverage": i.coverage, "lower": floats(i.lower), "upper": floats(i.upper)}
            for i in forecast.intervals
        ],
    }


def model_body(description: Description) -> dict[str, Any]:
    """The model part of a response."""
    body = plain(description)
    body["information_criteria"] = {
        k: v for k, v in body["information_criteria"].items() if v is not None
    }
    body["residual_diagnostics"] = residual_checks_body(description.residual_diagnostics)
    return body


def residual_checks_body(checks: ResidualChecks) -> dict[str, Any]:
    """The residual checks: ``ljung_box`` always (null when not run), the rest when given."""
    body = {"ljung_box": plain(checks.ljung_box)}
    for f in dataclasses.fields(checks):
        value = getattr(checks, f.name)
        if f.name != "ljung_box" and value is not None:
            body[f.name] = plain(value)
    return body


def warnings_body(found: list[FitWarning]) -> list[dict[str, str]]:
    """Warnings without repeats, in the order they were raised."""
    seen: dict[tuple[str, str], None] = {}
    for w in found:
        seen.setdefault((w.code, w.message), None)
    return [{"code": c, "message": m} for c, m in seen]


def refuse_overflow(body: dict[str, Any]) -> dict[str, Any]:
    """The forecast body unchanged, or FitError when a point or bound is not a finite float.

    The rule for intervals that are infinite in theory or overflow float64 (a coverage a
    hair below 1, a strong Box-Cox exponent, values near the float64 range): refused with a
    422 naming what the caller can change, never a 500 and never a bound of null.
    """
    if any(v is None for v in body["point"]):
        raise FitError(
            "the point forecast is not a finite number for this series (its values overflow "
            "the model's arithmetic); rescale the values or choose another model",
            field="series.values",
        )
    for interval in body["intervals"]:
        if any(v is None for v in (*interval["lower"], *interval["upper"])):
            raise FitError(
                f"the {interval['coverage']} interval is unbounded for this series and "
                "model (its bounds overflow float64); ask for a lower coverage, another "
                "transform or another model",
                field="coverage",
            )
    return body


# --- backtests and selection ------------------------------------------------------------
def _level_key(level: float) -> str:
    return f"{level:g}"


def _scores(s: Scores) -> dict[str, Any]:
    return {
        "mae": s.mae,
        "rmse": s.rmse,
        "mase": s.mase,
        "smape": s.smape,
        "observed_coverage": {_level_key(k): v for k, v in s.coverage.items()},
        "msis": {_level_key(k): v for k, v in s.msis.items()},
    }


def model_backtest(m: ModelBacktest) -> dict[str, Any]:
    """One specification's backtest: origins, per-step and overall scores."""
    steps = m.steps()
    overall = m.overall()
    return {
        "specification": m.specification,
        "label": m.label,
        "failure": m.failure,
        "origins": [f.origin for f in m.forecasts],
        "overall": None if overall is None else _scores(overall),
        "steps": [{"step": s.step, **_scores(s)} for s in steps],
        "fit_seconds": m.fit_seconds,
        "refilter_seconds": m.refilter_seconds,
        "warnings": [{"code": w.code, "message": w.message} for w in m.warnings],
    }


def ranking(entries: tuple[RankEntry, ...]) -> list[dict[str, Any]]:
    """Models by ascending score."""
    return [{"label": r.label, "specification": r.specification, "score": r.score} for r in entries]


def backtest_body(report: BacktestReport, found: list[FitWarning]) -> dict[str, Any]:
    """POST /v1/backtests without the data hash."""
    body = {
        "metric": report.metric,
        "horizon": report.horizon,
        "step": report.step,
        "estimation": report.estimation,
        "origins": report.origins,
        "coverage": report.coverage,
        "models": [model_backtest(m) for m in report.models],
        "ranking": ranking(report.ranking),
        "warnings": warnings_body(found),
    }
    return plain(body)


def _calibration(c: Calibration) -> dict[str, Any]:
    return {
        "origins": c.origins,
        "applied": c.applied,
        "reason": c.reason,
        "levels": [
            {
                "coverage": item.coverage,
                "observed_coverage": item.empirical,
                "calibrated_coverage": item.calibrated,
                "factor": item.factor,
                "scores": item.scores,
            }
            for item in c.levels
        ],
    }


def selection_body(s: Selection) -> dict[str, Any]:
    """How `auto` chose; the candidates' timings stay out so equal requests answer equally."""
    body = {
        "metric": s.metric,
        "rule": s.rule,
        "chosen": s.chosen,
        "ranking": ranking(s.ranking),
        "benchmark": s.benchmark,
        "skill_over_naive": s.skill_over_naive,
        "backtest": {"horizon": s.horizon, "step": s.step, "origins": s.origins},
        "calibration": None if s.calibration is None else _calibration(s.calibration),
        "candidates": {
            "candidates": [
                {"specification": as_dict(spec), "reason": reason}
                for spec, reason in zip(
                    s.candidates.specifications, s.candidates.reasons, strict=True
                )
            ],
            "skipped": s.candidates.skipped,
        },
        "profile": {
            "seasonal": s.profile.seasonal,
            "seasonal_period": s.profile.seasonal_period,
            "positive": s.profile.positive,
            "zero_share": s.profile.zero_share,
            "intermittent": s.profile.intermittent,
            "short": s.profile.short,
            "random_walk": s.profile.random_walk,
            "random_walk_reason": s.profile.random_walk_reason,
        },
        "failures": [{"label": label, "reason": why} for label, why in s.failures],
        "observations_used": s.observations_used,
    }
    return plain(body)


def forecast_answer(answer: ForecastAnswer) -> dict[str, Any]:
    """POST /v1/forecasts without the provenance; FitError when a bound overflows."""
    body: dict[str, Any] = {"name": answer.name, **forecast_body(answer.forecast)}
    body["model"] = model_body(answer.description)
    body["summary"] = answer.summary
    body["selection"] = None if answer.selection is None else selection_body(answer.selection)
    bound = answer.lower_bound
    body["lower_bound"] = None if bound is None else plain(dataclasses.asdict(bound))
    body["warnings"] = warnings_body(list(answer.warnings))
    if answer.fitted is not None:
        body["fitted"] = floats(answer.fitted)
    if answer.residuals is not None:
        body["residuals"] = floats(answer.residuals)
    return refuse_overflow(body)
