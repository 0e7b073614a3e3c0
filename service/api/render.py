"""Core results as response bodies: the wire format, in JSON-ready values (finite floats or
null, ISO 8601 strings); the response schemas in ``api/schemas`` describe every field."""

from __future__ import annotations

import dataclasses
from typing import Any

import numpy as np
import pandas as pd

from service.core.applicability import NotApplicable, plain_float, plain_floats
from service.core.data.frequency import frequency_name
from service.core.diagnostics.autocorrelation import BAND_NOTE, Correlogram
from service.core.diagnostics.cycles import MATTERS, SeveralPeriods
from service.core.diagnostics.differencing import SEASONAL_RULE, DifferencingOrders
from service.core.diagnostics.differencing import label as difference_label
from service.core.diagnostics.random_walk import RULE as RANDOM_WALK_RULE
from service.core.diagnostics.random_walk import RandomWalkVerdict
from service.core.diagnostics.seasonality import OUTLIER_RULE, Outliers
from service.core.diagnostics.sections import Diagnostics, Seasonality
from service.core.diagnostics.stationarity import VERDICT_RULE, HypothesisTest, Stationarity
from service.core.diagnostics.unit_root import PROCEDURE, UnitRootDecision, power_evidence
from service.core.errors import FitError
from service.core.evaluation.calibration import Calibration
from service.core.evaluation.records import BacktestReport, ModelBacktest, RankEntry, Scores
from service.core.models.base import Description, FitWarning, Forecast, as_dict
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


# --- diagnostics ------------------------------------------------------------------------
STRENGTH_RULE = "max(0, 1 - Var(R)/Var(C + R)), Wang, Smith & Hyndman (2006)"
OUTLIER_NOTE = "only observed points are flagged; interpolated ones are skipped"
_TERMS = {"c": "constant", "ct": "constant_and_trend"}
_NULLS = {"adf": "unit root", "kpss": "stationary"}


def not_applicable(value: NotApplicable) -> dict[str, Any]:
    """Every section that does not apply: ``{"applicable": false, "reason": ...}``."""
    return {"applicable": False, "reason": value.reason}


def hypothesis_test(test: HypothesisTest | NotApplicable) -> dict[str, Any]:
    """One ADF or KPSS test."""
    if isinstance(test, NotApplicable):
        return not_applicable(test)
    return {
        "applicable": True,
        "test": test.test,
        "deterministic_terms": _TERMS[test.regression],
        "null_hypothesis": _NULLS[test.test],
        "statistic": test.statistic,
        "p_value": test.p_value,
        "p_value_bound": test.p_value_bound,
        "critical_values": test.critical_values,
        "observations": test.observations,
        "lags_used": test.lags_used,
        "lag_rule": test.lag_rule,
        "rejects_null_at_5_percent": test.rejects,
    }


def _stationarity(s: Stationarity | NotApplicable) -> dict[str, Any]:
    if isinstance(s, NotApplicable):
        return not_applicable(s)
    return {
        "adf_constant": hypothesis_test(s.adf_constant),
        "adf_constant_and_trend": hypothesis_test(s.adf_trend),
        "kpss_level": hypothesis_test(s.kpss_level),
        "kpss_trend": hypothesis_test(s.kpss_trend),
        "verdict": s.verdict,
        "decision_rule": VERDICT_RULE,
        "unit_root_procedure": unit_root_procedure(s.procedure),
        "notes": s.notes,
    }


def unit_root_procedure(d: UnitRootDecision | NotApplicable | None) -> dict[str, Any] | None:
    """The sequential unit-root procedure: its steps, decision and the power of the length."""
    if d is None or isinstance(d, NotApplicable):
        return None if d is None else not_applicable(d)
    return {
        "procedure": PROCEDURE,
        "steps": [dataclasses.asdict(step) for step in d.steps],
        "unit_root": d.unit_root,
        "deterministic_terms": _TERMS[d.terms],
        "trend_or_drift": d.trending,
        "estimated_coefficient": d.coefficient,
        "power": power_evidence(d),
    }


def _differencing(d: DifferencingOrders | NotApplicable) -> dict[str, Any]:
    if isinstance(d, NotApplicable):
        return not_applicable(d)
    return {
        "regular_differences": d.regular,
        "seasonal_differences": d.seasonal,
        "seasonal_period": d.seasonal_period,
        "regular_rule": d.regular_rule,
        "seasonal_rule": SEASONAL_RULE,
        "steps": [dataclasses.asdict(s) for s in d.steps],
        "differenced_series": difference_label(d.regular, d.seasonal, d.seasonal_period),
        "adf_constant_after": hypothesis_test(d.adf_after),
        "kpss_level_after": hypothesis_test(d.kpss_after),
        "stationary_after": d.stationary_after,
        "notes": d.notes,
    }


def correlogram(c: Correlogram | NotApplicable) -> dict[str, Any]:
    """ACF and PACF (``acf[i]`` is lag ``i + 1``) with the band and Ljung-Box tests."""
    if isinstance(c, NotApplicable):
        return not_applicable(c)
    return {
        "applicable": True,
        "observations": c.observations,
        "max_lag": c.max_lag,
        "lags": list(range(1, c.max_lag + 1)),
        "acf": c.acf,
        "pacf": c.pacf,
        "band": {"lower": -c.band, "upper": c.band, "rule": BAND_NOTE},
        "significant_acf_lags": c.significant_acf_lags,
        "significant_pacf_lags": c.significant_pacf_lags,
        "ljung_box": c.ljung_box,
        "notes": c.notes,
    }


def _random_walk(v: RandomWalkVerdict | NotApplicable) -> dict[str, Any]:
    if isinstance(v, NotApplicable):
        return not_applicable(v)
    return {
        "applicable": True,
        "verdict": v.grade,
        "is_random_walk": v.is_random_walk,
        "is_seasonal_random_walk": v.is_seasonal_random_walk,
        "with_drift": v.with_drift,
        "forecast_to_beat": v.forecast_to_beat,
        "differences_to_stationarity": v.differences,
        "reason": v.reason,
        "rule": RANDOM_WALK_RULE,
        "tolerated_lags": v.tolerated_lags,
        "evidence": (
            v.evidence
            if v.decision is None
            else {**v.evidence, "unit_root": unit_root_procedure(v.decision)}
        ),
    }


def _seasonality(s: Seasonality | NotApplicable) -> dict[str, Any]:
    if isinstance(s, NotApplicable):
        return not_applicable(s)
    strength = s.seasonal_strength
    return {
        "applicable": True,
        "decomposition": s.method,
        "settings": s.settings,
        "strength_rule": STRENGTH_RULE,
        "trend_strength": s.trend_strength,
        "seasonal_strength": (
            not_applicable(strength) if isinstance(strength, NotApplicable) else strength
        ),
        "seasonal_period_from_frequency": s.seasonal_period,
        "candidate_periods": s.candidates,
        "components": s.components,
        "several_periods": None if s.several is None else plain(_several(s.several)),
    }


def _several(s: SeveralPeriods) -> dict[str, Any]:
    return {
        "decomposition": "mstl",
        "strength_rule": "max(0, 1 - Var(R)/Var(S_i + R)) per seasonal component S_i",
        "threshold": MATTERS,
        "periods": [
            {
                "period": p.period,
                "decomposed_as": p.decomposed_as,
                "strength": p.strength,
                "matters": p.matters,
            }
            for p in s.periods
        ],
        "periods_that_matter": list(s.periods_that_matter),
        "trend_strength": s.trend_strength,
        "left_out": list(s.left_out),
    }


def _outliers(o: Outliers | NotApplicable) -> dict[str, Any]:
    if isinstance(o, NotApplicable):
        return not_applicable(o)
    return {
        "applicable": True,
        "rule": OUTLIER_RULE,
        "threshold": o.threshold,
        "count": o.count,
        "listed": len(o.points),
        "points": o.points,
        "note": OUTLIER_NOTE,
    }


def diagnostics_body(report: Diagnostics, found: list[FitWarning]) -> dict[str, Any]:
    """POST /v1/diagnostics without the data hash."""
    body = {
        "summary": {
            "length": report.summary.length,
            "missing": report.summary.missing,
            "first_timestamp": report.summary.first,
            "last_timestamp": report.summary.last,
            "frequency": report.summary.frequency,
            "seasonal_period": report.summary.seasonal_period,
            "mean": report.summary.mean,
            "standard_deviation": report.summary.standard_deviation,
            "minimum": report.summary.minimum,
            "maximum": report.summary.maximum,
            "share_of_zeros": report.summary.share_of_zeros,
        },
        "stationarity": _stationarity(report.stationarity),
        "differencing": _differencing(report.differencing),
        "autocorrelation": {
            "series": correlogram(report.autocorrelation),
            "differenced": {
                "differenced_series": report.differenced_series,
                **correlogram(report.differenced_autocorrelation),
            },
        },
        "random_walk": _random_walk(report.random_walk),
        "seasonality": _seasonality(report.seasonality),
        "outliers": _outliers(report.outliers),
        "findings": report.findings,
        "notes": report.notes,
        "warnings": warnings_body(found),
    }
    return plain(body)


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
    body["selection"] = None if answer.selection is None else selection_body(answer.selection)
    bound = answer.lower_bound
    body["lower_bound"] = None if bound is None else plain(dataclasses.asdict(bound))
    body["warnings"] = warnings_body(list(answer.warnings))
    if answer.fitted is not None:
        body["fitted"] = floats(answer.fitted)
    if answer.residuals is not None:
        body["residuals"] = floats(answer.residuals)
    return refuse_overflow(body)
