"""The diagnostics report as a response body (POST /v1/diagnostics): each section a result
or ``{"applicable": false, "reason": ...}``, with the rule texts beside the results."""

from __future__ import annotations

import dataclasses
from typing import Any

from service.api.render import plain, warnings_body
from service.core.applicability import NotApplicable, plain_float, plain_floats
from service.core.diagnostics import symmetric_test
from service.core.diagnostics.autocorrelation import BAND_NOTE, Correlogram
from service.core.diagnostics.cycles import MATTERS, SeveralPeriods
from service.core.diagnostics.differencing import SEASONAL_RULE, DifferencingOrders
from service.core.diagnostics.differencing import label as difference_label
from service.core.diagnostics.random_walk import RULE as RANDOM_WALK_RULE
from service.core.diagnostics.random_walk import RandomWalkEvidence, RandomWalkVerdict
from service.core.diagnostics.seasonality import OUTLIER_RULE, Components, Outliers
from service.core.diagnostics.sections import Diagnostics, Seasonality
from service.core.diagnostics.stationarity import VERDICT_RULE, HypothesisTest, Stationarity
from service.core.diagnostics.unit_root import PROCEDURE, UnitRootDecision
from service.core.models.base import FitWarning

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
        "evidence": _evidence(v.evidence, v.decision),
    }


def _evidence(e: RandomWalkEvidence | None, decision: UnitRootDecision | None) -> dict[str, Any]:
    """The tests a random-walk verdict rests on (none for a straight line)."""
    if e is None:
        return {}
    out: dict[str, Any] = {
        "observations": e.observations,
        "ljung_box_differences": e.differences_white,
        "mean_difference": e.mean_difference,
    }
    if e.seasonal is not None:
        out["ljung_box_seasonal_differences"] = e.seasonal.white
        out["mean_seasonal_difference"] = e.seasonal.drift
        out["seasonal_lag_autocorrelation"] = e.seasonal.seasonal_lag_autocorrelation
    if decision is not None:
        out["unit_root"] = unit_root_procedure(decision)
    return out


def power_evidence(decision: UnitRootDecision) -> dict[str, Any]:
    """What this length can tell apart from a random walk, as numbers with their source."""
    terms, n = decision.terms, decision.observations
    phi = decision.distinguishable_coefficient
    return {
        "observations": n,
        "smallest_distinguishable_root": plain_float(1.0 / phi) if phi > 0 else None,
        "largest_distinguishable_coefficient": plain_float(phi),
        "half_life_steps": plain_float(symmetric_test.half_life(phi)),
        "definition": (
            "a stationary AR(1) series with a coefficient at or below this value (its root "
            "1/coefficient at or above the root given) is told apart from a random walk at least "
            f"4 times in 5 by the test at {symmetric_test.POWER_LEVEL[terms] * 100:g} %"
        ),
        "source": (
            "seeded simulation in service/core/diagnostics/symmetric_test.py "
            f"(seed {symmetric_test.SEED}, {symmetric_test.POWER_REPLICATIONS} series per length, "
            "interpolated in log length)"
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
        "components": None if s.components is None else _components(s.components),
        "several_periods": None if s.several is None else plain(_several(s.several)),
    }


def _components(c: Components) -> dict[str, Any]:
    """Timestamps with trend, seasonal (None if not applicable) and remainder, for plotting."""
    d = c.decomposition
    return {
        "method": d.method,
        "timestamps": [t.isoformat() for t in c.index],
        "trend": plain_floats(d.trend),
        "seasonal": None if d.seasonal is None else plain_floats(d.seasonal),
        "remainder": plain_floats(d.remainder),
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
