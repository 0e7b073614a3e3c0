"""Plain sentences about a series' diagnostics that a reporting system can show as they are."""

from __future__ import annotations

import pandas as pd
from pandas.tseries.frequencies import to_offset

from service.core.applicability import NotApplicable
from service.core.data.periods import cycle_name, period_text
from service.core.diagnostics.cycles import SeveralPeriods
from service.core.diagnostics.differencing import DifferencingOrders
from service.core.diagnostics.random_walk import RandomWalkVerdict
from service.core.diagnostics.seasonality import Outliers
from service.core.diagnostics.sections import Diagnostics, Seasonality
from service.core.diagnostics.stationarity import Stationarity

STRONG = 0.64
"""Strength above which trend or season is called strong (the seasonal-differencing threshold)."""
WEAK = 0.3


def findings(d: Diagnostics) -> tuple[str, ...]:
    """The sentences, most consequential first."""
    out: list[str] = []
    if d.summary.missing:
        out.append(
            f"{d.summary.missing} of {d.summary.length} values are missing; the tests ran on "
            "the series with them interpolated."
        )
    if isinstance(d.stationarity, NotApplicable):
        out.append(f"No statistical test applies: {d.stationarity.reason}.")
        return tuple(out)
    out += _random_walk(d.random_walk)
    out += _stationarity(d.stationarity, d.random_walk)
    if isinstance(d.differencing, DifferencingOrders):
        out.append(_differencing(d.differencing))
    out += _seasonality(d)
    if isinstance(d.outliers, Outliers) and d.outliers.count:
        first = d.outliers.points[0].timestamp.isoformat()
        out.append(
            f"{d.outliers.count} point(s) lie beyond the outlier threshold (the first at "
            f"{first}); check them before trusting a fitted model."
        )
    return tuple(out)


def _random_walk(v: RandomWalkVerdict | NotApplicable) -> list[str]:
    """The verdict's own reason: written for a reader who is not a statistician."""
    if isinstance(v, NotApplicable):
        return []
    sentence = v.reason
    if v.is_random_walk and v.tolerated_lags:
        sentence += (
            f" The few step-to-step correlations that stand out (lags "
            f"{', '.join(map(str, v.tolerated_lags))}) are no more than chance produces."
        )
    return [sentence]


_VERDICTS = {
    "stationary": "The series is stationary: it returns to a constant mean.",
    "trend_stationary": (
        "The series is stationary around a straight-line trend: forecast it with the trend "
        "rather than by differencing."
    ),
    "difference_stationary": (
        "The series has a unit root: its level wanders without returning to a fixed mean, so "
        "models work on its changes from step to step."
    ),
    "seasonal_difference_stationary": (
        "Its seasonal pattern wanders from one year to the next: models work on the change "
        "from the same season a year before."
    ),
    "inconclusive": (
        "The unit-root tests leave open whether the series wanders or returns to a mean."
    ),
}


def _stationarity(s: Stationarity, walk: RandomWalkVerdict | NotApplicable) -> list[str]:
    if s.verdict == "stationary" and isinstance(walk, RandomWalkVerdict):
        return []  # the random-walk sentence already says that it returns to its mean
    sentence = _VERDICTS.get(s.verdict)
    return [sentence] if sentence else []


def _differencing(o: DifferencingOrders) -> str:
    seasonal = f" and {o.seasonal} seasonal difference(s) at lag {o.seasonal_period}"
    return (
        f"An ARIMA model needs {o.regular} regular difference(s)"
        f"{seasonal if o.seasonal_period > 1 else ''}."
    )


def _seasonality(d: Diagnostics) -> list[str]:
    s = d.seasonality
    if not isinstance(s, Seasonality):
        return []
    out = _cycles(s.several, d.summary.frequency) if s.several is not None else []
    if isinstance(s.seasonal_strength, float):
        if s.seasonal_strength > STRONG:
            out.append(
                f"Seasonality is strong (strength {s.seasonal_strength:.2f} at period "
                f"{s.seasonal_period}): use a seasonal model."
            )
        elif s.seasonal_strength < WEAK:
            out.append(
                f"Seasonality at period {s.seasonal_period} is weak (strength "
                f"{s.seasonal_strength:.2f})."
            )
    if s.trend_strength > STRONG:
        out.append(f"The trend is strong (strength {s.trend_strength:.2f}).")
    found = [c.period for c in s.candidates if "periodogram" in c.found_by]
    if found and found[0] != s.seasonal_period and (s.candidates[0].share_of_variance or 0) > 0.2:
        out.append(
            f"The data suggest a period of {found[0]}, not the {s.seasonal_period} implied by "
            "the frequency."
        )
    return out


def _cycles(several: SeveralPeriods, frequency: str) -> list[str]:
    """Which cycles drive the series, by their MSTL strengths, each named ("the daily (24
    steps) and weekly (168 steps) cycles")."""
    strong = [p for p in several.periods if p.matters]
    weak = [p for p in several.periods if not p.matters]
    offset = _offset(frequency)
    out = []
    if strong:
        names = " and ".join(_cycle(p.period, offset) for p in strong)
        values = " and ".join(f"{p.strength:.2f}" for p in strong)
        out.append(
            f"The {names} cycles drive the series (MSTL strengths {values}): "
            "use a model for several seasonal periods."
            if len(strong) > 1
            else f"The {names} cycle drives the series (MSTL strength {values})."
        )
    for p in weak:
        out.append(
            f"The {_cycle(p.period, offset)} cycle is weak (MSTL strength "
            f"{p.strength:.2f}); a model can leave it out."
        )
    return out


def _cycle(period: float, offset: pd.DateOffset | None) -> str:
    """A calendar cycle by name and length ("daily (24 steps)"), another by length ("24-step")."""
    name = cycle_name(period, offset)
    text = period_text(period)
    return f"{name} ({text} steps)" if name else f"{text}-step"


def _offset(frequency: str) -> pd.DateOffset | None:
    try:
        return to_offset(frequency)
    except (TypeError, ValueError):
        return None
