"""The ETS search: rank the admissible models by AICc on cheap fits, then fit the finalists
exactly (estimated initial states started from the search solution, the likelihood maximised
as a least-squares problem: squares.py) and keep the lowest exact AICc."""

from __future__ import annotations

import math
import time
from dataclasses import dataclass, replace
from typing import TYPE_CHECKING, Any

import numpy as np
import pandas as pd
from statsmodels.tools.eval_measures import aicc
from statsmodels.tsa.exponential_smoothing.ets import ETSResults
from statsmodels.tsa.exponential_smoothing.initialization import _initialization_heuristic

from service.core.errors import FitError
from service.core.models.base import FitWarning
from service.core.models.ets.fitted import EtsFitted, checked_values, ets_label
from service.core.models.ets.lean import (
    LeanEtsModel,
    model_kwargs,
    n_parameters,
    point_forecast,
)
from service.core.models.library_warnings import captured
from service.core.models.plausibility import point_implausible

if TYPE_CHECKING:
    from service.core.models.ets.family import EtsSpec

SEARCH_MAXITER = 300
"""Optimiser iterations for a candidate's cheap fit."""
EXACT_MAXITER = 1000
"""Optimiser iterations for the finalists' exact fits."""
DAMPED_START = 0.98
"""A damped candidate's cheap fit starts from the undamped model's smoothing parameters and
this damping (statsmodels' upper bound, where the damped model is closest to the undamped
one): about a third fewer likelihood evaluations over the cheap fits, and the same winners
on the 334 searches of the accuracy rows (tests/benchmarks/RESULTS.md)."""
FINALISTS = 3
FINALIST_AICC = 4.0
"""The models within this many AICc of the best cheap fit (at most FINALISTS of them) are fitted
exactly and ranked again on those fits: heuristic initial states misorder close candidates."""


@dataclass(frozen=True)
class EtsCandidate:
    """One model tried by the search: its label, AICc (None when it failed) and why it failed."""

    label: str
    specification: EtsSpec
    aicc: float | None
    failure: str | None = None


@dataclass(frozen=True)
class EtsSearch:
    """The exactly fitted winner and the ranking of every candidate tried."""

    best: EtsFitted
    candidates: tuple[EtsCandidate, ...]


def search_ets(
    y: pd.Series,
    seasonal_period: int,
    spec: EtsSpec,
    warm: tuple[EtsSpec, tuple[float, ...]] | None = None,
) -> EtsSearch:
    """Rank the admissible ETS models for ``y`` by AICc and fit the winner exactly; ``warm``
    gives a model's earlier exact estimates as the exact fit's start when that model wins."""
    start = time.perf_counter()
    values = checked_values(y)
    if spec.is_complete():
        start_at = warm[1] if warm is not None and warm[0] == spec else None
        direct = _direct_fit(spec, y, values, seasonal_period, start_at)
        if direct is not None:
            direct.fit_seconds = time.perf_counter() - start
            score = direct.information_criteria().get("aicc")
            return EtsSearch(direct, (EtsCandidate(ets_label(spec), spec, score),))
    notes: list[FitWarning] = []
    tried: list[EtsCandidate] = []
    scored: list[tuple[float, EtsSpec, _Estimate]] = []
    starts: dict[tuple[str | None, str | None], tuple[Any, Any, Any]] = {}
    undamped: dict[EtsSpec, dict[str, float]] = {}
    for candidate in spec.candidates(values, seasonal_period):
        label = ets_label(candidate)
        plain = undamped.get(replace(candidate, damped=False)) if candidate.damped else None
        from_plain = None if plain is None else np.array([*plain.values(), DAMPED_START])
        estimate = _search_fit(candidate, values, seasonal_period, starts, from_plain)
        if estimate.failure is None and not candidate.damped:
            undamped[candidate] = estimate.smoothing
        problem = estimate.failure or _implausible(estimate, values)
        if problem is not None:
            tried.append(EtsCandidate(label, candidate, None, problem))
            notes.append(FitWarning("failed_candidate", f"{label} left out: {problem}"))
            continue
        tried.append(EtsCandidate(label, candidate, estimate.aicc))
        scored.append((estimate.aicc, candidate, estimate))
    if not scored:
        reasons = "; ".join(f"{c.label}: {c.failure}" for c in tried)
        raise FitError(f"no ETS model could be fitted to this series ({reasons})", field="model")
    scored.sort(key=lambda item: item[0])
    finalists = [item for item in scored[:FINALISTS] if item[0] <= scored[0][0] + FINALIST_AICC]
    fits = []
    for _, chosen, rough in finalists:
        earlier = warm[1] if warm is not None and warm[0] == chosen else None
        fits.append(_exact_fit(spec, chosen, y, values, seasonal_period, rough, earlier, starts))
    fitted = min(fits, key=_exact_aicc)
    fitted.warnings[:0] = notes if not spec.is_complete() else []
    fitted.fit_seconds = time.perf_counter() - start
    ranking = sorted(tried, key=lambda c: (c.aicc is None, c.aicc or 0.0))
    return EtsSearch(fitted, tuple(ranking))


def _direct_fit(
    spec: EtsSpec,
    y: pd.Series,
    values: np.ndarray,
    period: int,
    start_at: tuple[float, ...] | None = None,
) -> EtsFitted | None:
    """A fully specified model: one exact fit from statsmodels' own start, as a direct call
    would make (or from ``start_at``, earlier estimates of the same model, by least squares);
    None (so the two-stage path runs) when it fails, does not converge or forecasts
    implausibly. On 20 seeded seasonal series the two-stage path found the same likelihood
    (tests/benchmarks/RESULTS.md)."""
    caught: list[FitWarning] = []
    label = ets_label(spec)
    try:
        with captured(caught, label):
            kwargs = model_kwargs(spec, period)
            # Given a complete start, statsmodels' heuristic start is never read: zeros stand in.
            placeholder = (0.0, 0.0, np.zeros(period) if kwargs["seasonal"] else None)
            given = start_at is not None
            model = LeanEtsModel(values, starting_states=placeholder if given else None, **kwargs)
            start = None
            if start_at is not None and len(start_at) == len(model.start_params):
                start = np.asarray(start_at, dtype=float)
                # Earlier estimates of the same model, from the search's exact fits.
                model.by_least_squares = True
            elif given:
                model = LeanEtsModel(values, **kwargs)
            result = model.fit(start_params=start, disp=False, maxiter=EXACT_MAXITER)
            check = point_forecast(result, max(2 * period, 12))
    except (ValueError, np.linalg.LinAlgError, OverflowError, ZeroDivisionError):
        return None
    converged = (result.mle_retvals or {}).get("converged", True)
    estimate = _Estimate(
        _smoothing_of(result),
        _initial_of(result),
        float(result.llf),
        float(aicc(float(result.llf), values.size, n_parameters(spec, period))),
        "estimated",
        tuple(caught),
        forecast_check=check,
    )
    if not converged or not math.isfinite(estimate.llf) or _implausible(estimate, values):
        return None
    fitted = EtsFitted(
        specification=spec,
        chosen=spec,
        y=y,
        seasonal_period=period,
        smoothing=dict(estimate.smoothing),
        initial=estimate.initial,
        initialization="estimated",
        warnings=list(caught),
        estimates=tuple(float(v) for v in result.params),
    )
    fitted._cached = result
    return fitted


@dataclass(frozen=True)
class _Estimate:
    """A candidate's smoothing parameters, initial states, log-likelihood and AICc."""

    smoothing: dict[str, float]
    initial: tuple[float, ...]
    llf: float
    aicc: float
    initialization: str
    warnings: tuple[FitWarning, ...] = ()
    failure: str | None = None
    forecast_check: np.ndarray | None = None


def _search_fit(
    spec: EtsSpec,
    values: np.ndarray,
    period: int,
    starts: dict[tuple[str | None, str | None], tuple[Any, Any, Any]] | None = None,
    smoothing_start: np.ndarray | None = None,
) -> _Estimate:
    """A cheap fit with heuristic initial states (estimated ones when the data are too short).

    ``starts`` keeps statsmodels' heuristic initial states per trend and season type across
    the search's candidates (they differ only in the error and the damping): the same values
    given as known states make the same model, bit for bit, without decomposing the series
    again for every candidate. ``smoothing_start`` starts the smoothing parameters there
    (with heuristic states only; statsmodels' default start otherwise)."""
    k = n_parameters(spec, period)
    if values.size - k - 1 <= 0:
        return _failed(f"too few observations ({values.size}) for {k} parameters")
    method = "heuristic" if values.size >= max(10, 2 * period) else "estimated"
    caught: list[FitWarning] = []
    kwargs = model_kwargs(spec, period)
    try:
        with captured(caught, ets_label(spec)):
            if method == "heuristic" and starts is not None:
                key = (kwargs["trend"], kwargs["seasonal"])
                if key not in starts:
                    starts[key] = _initialization_heuristic(
                        values,
                        trend=kwargs["trend"],
                        seasonal=kwargs["seasonal"],
                        seasonal_periods=period if kwargs["seasonal"] else 1,
                    )
                level, trend, season = starts[key]
                model = LeanEtsModel(
                    values,
                    initialization_method="known",
                    initial_level=level,
                    initial_trend=trend,
                    initial_seasonal=np.array(season, dtype=float)
                    if kwargs["seasonal"]
                    else season,
                    **kwargs,
                )
            else:
                model = LeanEtsModel(values, initialization_method=method, **kwargs)
                smoothing_start = None
            result = model.fit(start_params=smoothing_start, disp=False, maxiter=SEARCH_MAXITER)
            check = point_forecast(result, max(2 * period, 12))
    except (ValueError, np.linalg.LinAlgError, OverflowError, ZeroDivisionError) as exc:
        return _failed(f"the optimiser failed ({exc})")
    retvals = result.mle_retvals or {}
    llf = float(result.llf)
    if not retvals.get("converged", True):
        return _failed("the optimisation did not converge")
    if not math.isfinite(llf):
        return _failed("the likelihood is not finite")
    return _Estimate(
        _smoothing_of(result),
        _initial_of(result),
        llf,
        float(aicc(llf, values.size, k)),
        method,
        tuple(caught),
        forecast_check=check,
    )


def _failed(reason: str) -> _Estimate:
    return _Estimate({}, (), math.nan, math.nan, "none", failure=reason)


def _implausible(estimate: _Estimate, values: np.ndarray) -> str | None:
    """A forecast that is non-finite or leaves the plausible band around the history (trap 8)."""
    check = estimate.forecast_check
    return None if check is None else point_implausible(check, values)


def _smoothing_of(result: ETSResults) -> dict[str, float]:
    out = {"alpha": float(result.smoothing_level)}
    if result.model.has_trend:
        out["beta"] = float(result.smoothing_trend)
    if result.model.has_seasonal:
        out["gamma"] = float(result.smoothing_seasonal)
    if result.model.damped_trend:
        out["phi"] = float(result.damping_trend)
    return out


def _initial_of(result: ETSResults) -> tuple[float, ...]:
    """Initial level, trend and season in the order ETSModel's 'known' initialisation takes."""
    out = [float(result.initial_level)]
    if result.model.has_trend:
        out.append(float(result.initial_trend))
    if result.model.has_seasonal:
        out.extend(float(v) for v in np.asarray(result.initial_seasonal, dtype=float))
    return tuple(out)


def _exact_fit(
    requested: EtsSpec,
    chosen: EtsSpec,
    y: pd.Series,
    values: np.ndarray,
    period: int,
    rough: _Estimate,
    warm: tuple[float, ...] | None = None,
    starts: dict[tuple[str | None, str | None], tuple[Any, Any, Any]] | None = None,
) -> EtsFitted:
    """Re-estimate the winner with estimated initial states, started from the search solution
    (or from ``warm``, earlier exact estimates of the same model on a shorter history);
    ``starts`` holds the search's heuristic initial states (``_search_fit``)."""
    notes = list(rough.warnings)
    estimate = rough
    kept: ETSResults | None = None
    if rough.initialization == "heuristic":
        caught: list[FitWarning] = []
        try:
            with captured(caught, ets_label(chosen)):
                # Plain values, as in EtsFitted.results().
                kwargs = model_kwargs(chosen, period)
                heuristic = _same_heuristic(kwargs, values.size, period, starts)
                model = LeanEtsModel(values, starting_states=heuristic, **kwargs)
                model.by_least_squares = True
                start = np.asarray(model.start_params, dtype=float).copy()
                if warm is not None and len(warm) == start.size:
                    start = np.asarray(warm, dtype=float)
                else:
                    start[: len(rough.smoothing)] = list(rough.smoothing.values())
                result = model.fit(start_params=start, disp=False, maxiter=EXACT_MAXITER)
            exact = _Estimate(
                _smoothing_of(result),
                _initial_of(result),
                float(result.llf),
                float(aicc(float(result.llf), values.size, n_parameters(chosen, period))),
                "estimated",
                tuple(caught),
            )
            converged = (result.mle_retvals or {}).get("converged", True)
            if converged and math.isfinite(exact.llf) and exact.llf >= rough.llf:
                estimate = exact
                notes = list(caught)
                kept = result
            else:
                notes.append(
                    FitWarning(
                        "kept_heuristic_start",
                        f"{ets_label(chosen)}: estimating the initial states did not improve "
                        "the likelihood; heuristic initial states kept",
                    )
                )
        except (ValueError, np.linalg.LinAlgError, OverflowError, ZeroDivisionError) as exc:
            notes.append(
                FitWarning("kept_heuristic_start", f"{ets_label(chosen)}: exact fit failed ({exc})")
            )
    fitted = EtsFitted(
        specification=requested,
        chosen=chosen,
        y=y,
        seasonal_period=period,
        smoothing=dict(estimate.smoothing),
        initial=estimate.initial,
        initialization=estimate.initialization,
        warnings=notes,
        estimates=tuple(float(v) for v in kept.params) if kept is not None else (),
    )
    # The exact fit's own results serve this history: no re-smoothing for the first forecast.
    fitted._cached = kept
    return fitted


def _same_heuristic(
    kwargs: dict[str, Any],
    n: int,
    period: int,
    starts: dict[tuple[str | None, str | None], tuple[Any, Any, Any]] | None,
) -> tuple[Any, Any, Any] | None:
    """The search's heuristic initial states for this trend and season where statsmodels'
    estimated initialisation would compute the same (below 10 + 2 (m // 2) points it takes a
    simpler start instead); None otherwise."""
    m = period if kwargs["seasonal"] else 1
    if starts is None or n < 10 + 2 * (m // 2):
        return None
    return starts.get((kwargs["trend"], kwargs["seasonal"]))


def _exact_aicc(fitted: EtsFitted) -> float:
    """A finalist's AICc on its exact fit (infinite when it cannot be computed)."""
    try:
        value = fitted.information_criteria().get("aicc", math.inf)
    except (ValueError, ArithmeticError, np.linalg.LinAlgError):
        return math.inf
    return value if math.isfinite(value) else math.inf
