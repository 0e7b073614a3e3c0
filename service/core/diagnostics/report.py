"""Diagnostics of one series: is it forecastable, and how (POST /v1/diagnostics).

``diagnose`` runs every section on the gap-free view of the series (core.filling) and never
raises for a series the statistics cannot handle: such sections say ``applicable: false`` and
why. Requested lags beyond what the series supports are clamped, with a note, not refused.
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np
import pandas as pd

from service.core.applicability import NotApplicable
from service.core.checks import check_positive_int
from service.core.data.filling import check_series, fill_gaps
from service.core.diagnostics.autocorrelation import (
    Correlogram,
    correlogram,
    default_max_lag,
    largest_lag,
    sample_acf,
    white_noise_band,
)
from service.core.diagnostics.cycles import several_periods
from service.core.diagnostics.differencing import (
    DifferencingOrders,
    difference,
    label,
    orders_from,
    story_orders,
)
from service.core.diagnostics.findings import findings
from service.core.diagnostics.random_walk import RandomWalkVerdict, judge, seasonal_check
from service.core.diagnostics.seasonality import (
    Components,
    Decomposition,
    candidate_periods,
    decompose,
    outliers,
    seasonal_strength,
    trend_strength,
)
from service.core.diagnostics.sections import Diagnostics, Seasonality, Summary
from service.core.diagnostics.story import contradictions
from service.core.diagnostics.unit_root import stationarity
from service.core.errors import RequestError


def diagnose(
    y: pd.Series,
    seasonal_period: int,
    max_lag: int | None = None,
    include_components: bool = False,
    periods: tuple[float, ...] = (),
) -> Diagnostics:
    """All diagnostics of a regular series; missing values are interpolated for the tests.

    With two or more ``periods`` (the series' seasonal periods) an MSTL decomposition gives
    each period's strength, and outliers are flagged on its remainder."""
    check_series(y)
    check_positive_int(seasonal_period, "series.seasonal_period")
    if max_lag is not None:
        check_positive_int(max_lag, "max_lag")
    if not isinstance(include_components, bool):
        raise RequestError("include_components must be true or false", field="include_components")
    filled = fill_gaps(y)
    x = filled.values
    notes = filled.note()
    summary = summarise(y, seasonal_period)
    if x.size == 0:
        return _empty(summary, NotApplicable("the series has no observed values"), notes)
    if not np.any(x != x[0]):
        return _empty(summary, NotApplicable("the series is constant"), notes, x, seasonal_period)
    decomposition = decompose(x, seasonal_period)
    tests = stationarity(x, notes, seasonal_period)
    decision = tests.procedure
    if decision is None:
        decision = NotApplicable("the unit-root tests do not apply to this series")
    walk = judge(x, seasonal_period, decision, seasonal_check(x, seasonal_period))
    if isinstance(walk, RandomWalkVerdict) and walk.is_seasonal_random_walk:
        tests = replace(tests, verdict="seasonal_difference_stationary")
    orders = story_orders(x, seasonal_period, decomposition, notes, decision, walk)
    stationary_form = difference(x, orders.regular, orders.seasonal, seasonal_period)
    acf = _correlogram(x, seasonal_period, max_lag, notes)
    several = several_periods(x, tuple(periods)) if len(periods) > 1 else None
    seasonality = _seasonality(x, decomposition, filled.index, include_components)
    if isinstance(seasonality, Seasonality) and several is not None:
        seasonality = replace(seasonality, several=several)
    remainder = decomposition.remainder if isinstance(decomposition, Decomposition) else None
    if several is not None:
        remainder = several.remainder
    report = Diagnostics(
        summary=summary,
        stationarity=tests,
        differencing=orders,
        autocorrelation=acf,
        differenced_autocorrelation=_correlogram(stationary_form, seasonal_period, max_lag, ()),
        differenced_series=label(orders.regular, orders.seasonal, seasonal_period),
        random_walk=walk,
        seasonality=seasonality,
        outliers=(
            outliers(remainder, x, filled.observed, filled.index)
            if remainder is not None
            else NotApplicable("no decomposition: no remainder to screen")
        ),
        notes=notes,
    )
    report = replace(report, findings=findings(report))
    conflicts = contradictions(report)
    if conflicts:
        said = tuple(f"the sections disagree: {c}" for c in conflicts)
        report = replace(report, notes=(*notes, *said))
    return report


def summarise(y: pd.Series, seasonal_period: int) -> Summary:
    """Length, missing count, span and moments of the observed values."""
    values = y.to_numpy(dtype=float, na_value=np.nan)
    observed = values[np.isfinite(values)]
    index = pd.DatetimeIndex(y.index)
    some = observed.size > 0
    return Summary(
        length=int(values.size),
        missing=int(values.size - observed.size),
        first=index[0] if index.size else None,
        last=index[-1] if index.size else None,
        frequency=str(index.freqstr),
        seasonal_period=seasonal_period,
        mean=float(observed.mean()) if some else None,
        standard_deviation=float(observed.std(ddof=1)) if observed.size > 1 else None,
        minimum=float(observed.min()) if some else None,
        maximum=float(observed.max()) if some else None,
        share_of_zeros=float(np.mean(observed == 0.0)) if some else None,
    )


def _correlogram(
    x: np.ndarray, seasonal_period: int, max_lag: int | None, notes: tuple[str, ...]
) -> Correlogram | NotApplicable:
    wanted = default_max_lag(x.size, seasonal_period) if max_lag is None else max_lag
    return correlogram(x, max(1, wanted), seasonal_period, notes)


def _seasonality(
    x: np.ndarray,
    decomposition: Decomposition | NotApplicable,
    index: pd.DatetimeIndex,
    include_components: bool,
) -> Seasonality | NotApplicable:
    if isinstance(decomposition, NotApplicable):
        return decomposition
    season = seasonal_strength(decomposition)
    detrended = x - decomposition.trend
    lags = largest_lag(x.size)
    acf = sample_acf(detrended, lags) if lags >= 1 else np.empty(0)
    return Seasonality(
        method=decomposition.method,
        seasonal_period=decomposition.period,
        trend_strength=trend_strength(decomposition),
        seasonal_strength=(
            NotApplicable(decomposition.seasonal_reason or "no seasonal component")
            if season is None
            else season
        ),
        candidates=tuple(candidate_periods(detrended, acf, white_noise_band(x.size))),
        settings=decomposition.settings,
        components=Components(decomposition, index) if include_components else None,
    )


def _empty(
    summary: Summary,
    reason: NotApplicable,
    notes: tuple[str, ...],
    x: np.ndarray | None = None,
    seasonal_period: int = 1,
) -> Diagnostics:
    """The response for a series with nothing to test: every section says why."""
    orders: DifferencingOrders | NotApplicable = reason
    if x is not None:
        orders = orders_from(x, seasonal_period, reason, notes)
    report = Diagnostics(
        summary=summary,
        stationarity=reason,
        differencing=orders,
        autocorrelation=reason,
        differenced_autocorrelation=reason,
        differenced_series="y",
        random_walk=reason,
        seasonality=reason,
        outliers=reason,
        notes=notes,
    )
    return replace(report, findings=findings(report))
