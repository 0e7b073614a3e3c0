"""Which candidate models the automatic selection tries, from a short profile of the series.

Rules (the table DEVELOPERS.md carries; n = observations, m = seasonal period):

    profile           test
    seasonal          m > 1, n >= 2m + 2, and |r_m| of the first differences exceeds
                      1.645·√((1 + 2·Σ_{k<m} r_k²)/n), the 90 % seasonality test of the M4
                      benchmarks (Makridakis et al. 2020; there on the series itself, here on
                      its differences so a random walk is not called seasonal), or, given
                      the diagnostics, STL seasonal strength >= 0.64 (the threshold of Wang,
                      Smith & Hyndman 2006, from memory, also used for D in the ARIMA search)
    long period       seasonal and m >= 24: ETS and seasonal ARIMA are slow or unstable there
                      (hourly seasonal ARIMA runs past the time budget: RESULTS.md)
    positive          every observed value > 0 (admits multiplicative ETS, left to its search)
    intermittent      no negative values and a share of zeros >= 0.3
    short             n < 30, or fewer than 3 full seasons when seasonal
    random walk       the diagnostics' verdict; without them: ADF (constant) does not reject a
                      unit root at 5 % and the lag-1 autocorrelation of the differences lies in
                      ±1.96/√n (nothing left to model after differencing)

    profile                    candidates (always the benchmarks: naive, and seasonal naive
                                 when seasonal)
    intermittent               croston (classic), croston (sba), mean
    not intermittent           ets (AICc over the taxonomy), drift (benchmark only)
      and positive             + ets with additive errors on the log scale (AICc over trend
                                 and season; a damped trend, season by AICc, when m <= 4)
      and fitted with m = 1    + the equal-weight combination of SES, Holt and damped Holt
                                 (additive errors), the M4 competition's benchmark; no theta
                                 (without a season it is SES with drift, inside that span)
      and fitted with m > 1    + theta (classical multiplicative seasonal adjustment; the
                                 share of the OLS slope carried as drift fitted by one-step
                                 errors on running slopes, not fixed at half)
      and not short            + arima (not for a long season, where STL + ETS and the
                                 non-seasonal models stand in; on the log scale when positive
                                 and fitted with m > 1, on both scales when positive and
                                 fitted with m = 1): by default search="quick" (stepwise
                                 walk on CSS AICc, two exact fits); when thorough, the full
                                 stepwise AICc search
      and long period          + stl with ets base (and, when thorough, stl with arima
                                 base), instead of the seasonal variants of ets and arima;
                                 ets then runs with m = 1
      and periods that matter  + mstl with ets base (on the log scale when positive) and
        are several or one       harmonic regression (also on the log scale when positive);
        is above 24              when the periods are several and the history holds five
                                 cycles of the longest, stl is left out beside them, and with
                                 a long first period the models fitted with m = 1 (ets, the
                                 SES/Holt/damped combination)

A family that is not (yet) in the registry is skipped and listed in ``skipped``. The
figures behind each rule are in tests/benchmarks/RESULTS.md.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd

from service.core.applicability import NotApplicable
from service.core.diagnostics.autocorrelation import (
    sample_acf,
    seasonal_lag_stands_out,
    white_noise_band,
)
from service.core.diagnostics.stationarity import adf_test
from service.core.errors import SpecificationError
from service.core.models.registry import FAMILIES, specification_from_dict
from service.core.models.transforms import Transform, TransformedSpec

INTERMITTENT_ZERO_SHARE = 0.3
SEASONAL_STRENGTH = 0.64
LONG_PERIOD = 24
SHORT_POINTS = 30
SHORT_SEASONS = 3
DAMPED_LOG_PERIOD = 4
"""Up to this seasonal period the log-scale ETS candidate has a damped trend."""
SUPERSEDE_CYCLES = 5
"""Cycles of the longest period from which the models of fewer periods give way: two before a
backtest's first origin plus three origins a cycle apart (a week ahead of hourly data)."""
TRANSFORM_KEY = "transform"
"""A rule's dict may name a transform: the specification is then fitted on that scale."""


@dataclass(frozen=True)
class SeriesProfile:
    """What the candidate rules look at; built from the diagnostics or by ``profile_series``."""

    observations: int
    seasonal_period: int
    seasonal: bool
    positive: bool
    zero_share: float
    random_walk: bool
    random_walk_reason: str = ""
    seasonal_random_walk: bool = False
    """The diagnostics found y_t = y_{t-m} + noise: seasonal naive is the forecast to beat."""
    seasonal_periods: tuple[float, ...] = ()
    """The periods that matter by the diagnostics' strengths (several_period_rules)."""

    @property
    def intermittent(self) -> bool:
        """Many zeros and no negative values: demand that comes in bursts."""
        return self.zero_share >= INTERMITTENT_ZERO_SHARE

    @property
    def long_period(self) -> bool:
        """A season too long for seasonal ETS/ARIMA: handled by STL instead."""
        return self.seasonal and self.seasonal_period >= LONG_PERIOD

    @property
    def short(self) -> bool:
        """Too short for the ARIMA search to be worth its variance."""
        if self.seasonal:
            return self.observations < SHORT_SEASONS * self.seasonal_period
        return self.observations < SHORT_POINTS

    @property
    def model_period(self) -> int:
        """The period the candidates are fitted with: m when seasonal and short enough, else 1."""
        return self.seasonal_period if self.seasonal and not self.long_period else 1

    @property
    def benchmark_period(self) -> int:
        """The period of the naive benchmark and of the MASE scale: m when seasonal, else 1."""
        return self.seasonal_period if self.seasonal else 1


def seasonality_test(values: np.ndarray, period: int) -> bool:
    """The M4 benchmarks' 90 % seasonal-lag test, on the first differences so that a trend or
    a wandering level is not mistaken for a season."""
    y = values[np.isfinite(values)]
    if period <= 1 or y.size < 2 * period + 2:
        return False
    return seasonal_lag_stands_out(np.diff(y), period)


def random_walk_fallback(values: np.ndarray) -> tuple[bool, str]:
    """Unit root not rejected and differences uncorrelated; used until diagnostics are given."""
    y = values[np.isfinite(values)]
    if y.size < 10 or np.ptp(y) == 0:
        return False, "too short or constant to test"
    d = np.diff(y)
    r1 = float(sample_acf(d, 1)[0]) if np.ptp(d) > 0 else 0.0
    band = white_noise_band(y.size)
    test = adf_test(y, "c")
    if isinstance(test, NotApplicable):
        # A singular or degenerate test regression (e.g. an exact line) decides nothing.
        return False, f"unit-root test inconclusive: {test.reason}"
    verdict = not test.rejects and abs(r1) <= band
    rejected = "rejects" if test.rejects else "does not reject"
    reason = (
        f"ADF p = {test.p_value:.3f} {rejected} a unit root at 5 %; lag-1 autocorrelation of "
        f"the differences {r1:.3f} (band ±{band:.3f})"
    )
    return verdict, reason


def profile_series(
    y: pd.Series, seasonal_period: int, diagnostics: Any | None = None
) -> SeriesProfile:
    """The candidate rules' view of a series, taking the random-walk and seasonality verdicts
    from ``diagnostics`` (an object or mapping of core.diagnostics) when given."""
    values = y.to_numpy(dtype=float)
    finite = values[np.isfinite(values)]
    seasonal = seasonality_test(values, seasonal_period)
    strength = _lookup(diagnostics, ("seasonality", "seasonal_strength"))
    enough = seasonal_period > 1 and finite.size >= 2 * seasonal_period + 2
    if isinstance(strength, (int, float)) and not isinstance(strength, bool):
        # A smooth long season barely shows in the differences; STL strength sees it.
        seasonal = seasonal or (enough and float(strength) >= SEASONAL_STRENGTH)
    walk = _lookup(diagnostics, ("random_walk", "is_random_walk"))
    reason = _lookup(diagnostics, ("random_walk", "reason"))
    seasonal_walk = _lookup(diagnostics, ("random_walk", "is_seasonal_random_walk")) is True
    seasonal = seasonal or (enough and seasonal_walk)
    if isinstance(walk, bool):
        random_walk, why = walk, str(reason or "from the diagnostics")
    else:
        random_walk, why = random_walk_fallback(values)
    has_negative = bool(np.any(finite < 0))
    zero_share = 0.0 if has_negative or not finite.size else float(np.mean(finite == 0))
    return SeriesProfile(
        observations=int(finite.size),
        seasonal_period=seasonal_period,
        seasonal=seasonal,
        positive=bool(finite.size and np.all(finite > 0)),
        zero_share=zero_share,
        random_walk=random_walk,
        random_walk_reason=why,
        seasonal_random_walk=seasonal and seasonal_walk,
        seasonal_periods=_periods_that_matter(diagnostics),
    )


def _lookup(source: Any, path: tuple[str, ...]) -> Any:
    """Follow attribute or key names through nested diagnostics; None where absent."""
    current = source
    for name in path:
        if current is None:
            return None
        if isinstance(current, Mapping):
            current = current.get(name)
        else:
            current = getattr(current, name, None)
    return current


@dataclass(frozen=True)
class CandidateSet:
    """The specifications to try, with the reason for each and the families left out."""

    specifications: tuple[Any, ...]
    reasons: tuple[str, ...]
    skipped: tuple[str, ...] = field(default=())


_TREND_COMBINATION: dict[str, Any] = {
    "family": "combination",
    "members": [
        {"family": "ets", "error": "add", "trend": "none", "damped": False},
        {"family": "ets", "error": "add", "trend": "add", "damped": False},
        {"family": "ets", "error": "add", "trend": "add", "damped": True},
    ],
}


def candidate_rules(
    profile: SeriesProfile, thorough: bool = False
) -> list[tuple[dict[str, Any], str]]:
    """The specification dicts the rules pick for this profile, with a reason each."""
    out: list[tuple[dict[str, Any], str]] = [({"family": "naive"}, "benchmark")]
    if profile.seasonal:
        out.append(({"family": "seasonal_naive"}, "benchmark for a seasonal series"))
    if profile.intermittent:
        share = f"{profile.zero_share:.0%} zeros"
        out.append(({"family": "croston", "variant": "classic"}, f"intermittent ({share})"))
        out.append(({"family": "croston", "variant": "sba"}, f"intermittent ({share})"))
        out.append(({"family": "mean"}, f"intermittent ({share})"))
        return out
    out.append(({"family": "ets"}, "exponential smoothing, AICc over the taxonomy"))
    if profile.positive:
        # Additive errors on the log scale: growth and seasons proportional to the level,
        # with bounds that stay positive. With a period of at most DAMPED_LOG_PERIOD (yearly,
        # quarterly, non-seasonal data) its trend is damped: a log-scale trend compounds, and
        # short histories give little evidence that growth goes on at the same rate.
        logged: dict[str, Any] = {"family": "ets", "error": "add", TRANSFORM_KEY: "log"}
        reason = "exponential smoothing on the log scale (positive series)"
        if profile.seasonal_period <= DAMPED_LOG_PERIOD:
            logged |= {"trend": "add", "damped": True}
            reason = "damped-trend exponential smoothing on the log scale (positive series)"
        out.append((logged, reason))
    if profile.model_period == 1:
        # Non-seasonal members only: seasonal ones cost seconds of exact fits. Theta is left
        # out here: without a season it is SES with half the OLS slope, inside the span of
        # SES and Holt already averaged (figures in tests/benchmarks/RESULTS.md).
        out.append((_TREND_COMBINATION, "SES, Holt and damped Holt averaged (the M4 benchmark)"))
    else:
        # The drift share fitted (the dynamic optimised theta model of Fiorucci et al. 2016):
        # with half the slope Theta under-trends strongly trending seasonal series.
        theta = {"family": "theta", "slope_share": "fitted_running"}
        out.append((theta, "theta method on classically adjusted data, drift share fitted"))
    out.append(({"family": "drift"}, "benchmark with trend"))
    if not profile.short and not profile.long_period:
        note = ""
        arima: dict[str, Any] = {"family": "arima"}
        if thorough:
            note = ", stepwise AICc search" + note
        else:
            arima["search"] = "quick"
            note = ", stepwise walk on CSS AICc (quick search)" + note
        if profile.positive and profile.model_period > 1:
            # A season that grows with the level is additive on the log scale.
            arima[TRANSFORM_KEY] = "log"
            note = " on the log scale (positive and seasonal)" + note
        out.append((arima, "ARIMA" + note))
        if profile.positive and profile.model_period == 1:
            # Without a season both scales: growth in proportion to the level (populations,
            # prices, rates) is linear in logs, and its bounds stay positive.
            logged_arima = {**arima, TRANSFORM_KEY: "log"}
            out.append((logged_arima, "ARIMA on the log scale (positive)" + note))
    if profile.long_period:
        out.append(({"family": "stl", "base": {"family": "ets"}}, "long season: STL + ETS"))
        if thorough:
            out.append(({"family": "stl", "base": {"family": "arima"}}, "long season: STL + ARIMA"))
    several = several_period_rules(profile)
    if several:
        out = [rule for rule in out if not _superseded(rule[0], several, profile)]
    return out + several


# --- several or long periods (issue 14): MSTL and harmonic regression -------------------


def _periods_that_matter(diagnostics: Any) -> tuple[float, ...]:
    found = _lookup(diagnostics, ("seasonality", "periods_that_matter"))
    return tuple(float(p) for p in found) if isinstance(found, tuple) else ()


def several_period_rules(profile: SeriesProfile) -> list[tuple[dict[str, Any], str]]:
    """MSTL + ETS and harmonic regression when the periods that matter are several or one is
    above 24 (intermittent series never get here); harmonic regression on the log scale too
    for positive series, where weekly and yearly cycles that multiply become additive."""
    periods = [p for p in profile.seasonal_periods if profile.observations >= 2 * p + 1]
    if not (len(periods) > 1 or any(p > LONG_PERIOD for p in periods)):
        return []
    text = ", ".join(f"{p:g}" for p in periods)
    mstl: dict[str, Any] = {"family": "mstl", "periods": periods}
    if profile.positive:
        # Cycles that multiply (weekly x yearly counts) add up on the log scale: MSTL + ETS
        # there scored 0.98 against 1.19 on daily counts, 0.57 against 0.59 on hourly ones.
        mstl[TRANSFORM_KEY] = "log"
    out: list[tuple[dict[str, Any], str]] = [
        (
            mstl,
            f"periods {text}: MSTL then ETS" + (" on the log scale" if profile.positive else ""),
        ),
        (
            {"family": "harmonic_regression", "periods": periods},
            f"periods {text}: harmonic regression with ARIMA errors",
        ),
    ]
    if profile.positive:
        logged = {"family": "harmonic_regression", "periods": periods, TRANSFORM_KEY: "log"}
        out.append((logged, f"periods {text}: harmonic regression on the log scale (positive)"))
    return out


def _superseded(
    data: Mapping[str, Any], several: list[tuple[dict[str, Any], str]], profile: SeriesProfile
) -> bool:
    """Candidates that model fewer of the periods that matter than MSTL and harmonic regression
    do, left out beside them when those periods are several: STL at the first period alone,
    and, when that period is long, the models fitted without any (period 1). On hourly counts
    with daily and weekly cycles these forecast Monday at Sunday night's level, and their share
    of the combination cost more than the members they joined gained; with one long period
    (co2 weekly, 52) the models without a period still helped (tests/benchmarks/RESULTS.md).
    Only with SUPERSEDE_CYCLES cycles of the longest period: with fewer, MSTL and harmonic
    regression may not fit before the backtest's first origin, and the rest must stand in."""
    periods = several[0][0]["periods"]
    if len(periods) < 2 or profile.observations < SUPERSEDE_CYCLES * max(periods):
        return False
    family = data.get("family")
    return family == "stl" or (profile.long_period and family in ("ets", "combination"))


def candidates_for(profile: SeriesProfile, thorough: bool = False) -> CandidateSet:
    """Specifications for the rules' picks, skipping families the registry does not know."""
    specs: list[Any] = []
    reasons: list[str] = []
    skipped: list[str] = []
    for data, reason in candidate_rules(profile, thorough):
        if not _families_known(data, FAMILIES):
            skipped.append(f"{data['family']}: not available")
            continue
        plain = {k: v for k, v in data.items() if k != TRANSFORM_KEY}
        try:
            spec = specification_from_dict(plain, field="candidates")
            if TRANSFORM_KEY in data:
                spec = TransformedSpec(spec, Transform(data[TRANSFORM_KEY]))
            specs.append(spec)
        except SpecificationError as exc:
            skipped.append(f"{data['family']}: {exc.message}")
            continue
        reasons.append(reason)
    return CandidateSet(tuple(specs), tuple(reasons), tuple(skipped))


def _families_known(data: Mapping[str, Any], known: Mapping[str, Any]) -> bool:
    if data.get("family") not in known:
        return False
    base = data.get("base")
    members = data.get("members") or []
    nested = [base] if isinstance(base, Mapping) else []
    return all(_families_known(item, known) for item in [*nested, *members])
