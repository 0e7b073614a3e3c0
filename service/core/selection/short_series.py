"""Short series are cut down step by step, never refused while a simple family can answer.

1. The selection plan as asked: at least max(10, 3m) points before the first origin for a
   seasonal series (10 otherwise), and two full cycles of the longest period when candidates
   model several periods and the horizon allows; the horizon shortened when needed
   (``backtest_horizon_shortened``).
2. A seasonal series too short for three seasons before the first origin: two seasons and two
   points (``backtest_shortened``).
3. Still too short: the season is left out and only the simple families are compared (naive,
   mean, simple exponential smoothing, Theta), with at least ``SIMPLE_TRAINING`` points before
   the first origin (``simple_families_only``).
4. Too short even for that (fewer than five points): no backtest; the naive forecast is
   delivered (``no_backtest``).
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Sequence
from dataclasses import dataclass

from service.core.evaluation.origins import (
    SIMPLE_TRAINING,
    Plan,
    feasible_plan,
    minimum_training,
    selection_plan,
    selection_training,
)
from service.core.models.base import FitWarning, Specification
from service.core.models.ets.family import EtsSpec
from service.core.models.mean import MeanSpec
from service.core.models.naive import NaiveSpec
from service.core.models.theta import ThetaSpec
from service.core.selection.candidates import CandidateSet, SeriesProfile


@dataclass(frozen=True)
class Cuts:
    """The plan (None: no backtest at all), the profile it applies to, whether only the
    simple families are compared, and the warnings that say what was cut."""

    plan: Plan | None
    profile: SeriesProfile
    simple_only: bool = False
    warnings: tuple[FitWarning, ...] = ()


def plan_for(
    n: int, horizon: int, origins: int, profile: SeriesProfile, longest: float = 0.0
) -> Cuts:
    """The selection plan, cut down for short series instead of refusing them.

    ``longest``: the longest period of the candidates that model several or long periods
    (MSTL, harmonic regression), which need two full cycles of it before the first origin.
    When the requested horizon allows, the origins move that late (a shorter step, then
    fewer origins); otherwise the plan is the usual one and those candidates drop out."""
    period = profile.benchmark_period
    if longest:
        need = max(selection_training(period), math.ceil(2 * longest) + 2)
        late = selection_plan(n, horizon, origins, period, training=need)
        if late is not None:
            return Cuts(late, profile)
    found = feasible_plan(n, horizon, origins, period)
    notes: list[FitWarning] = []
    if found is None and profile.seasonal:
        need = minimum_training(period)
        found = feasible_plan(n, horizon, origins, period, training=need)
        if found is not None:
            notes.append(
                FitWarning(
                    "backtest_shortened",
                    f"the series is too short for three full seasons before the first "
                    f"backtest origin; candidates were estimated on two seasons ({need} "
                    "points or more)",
                )
            )
    simple = found is None
    if found is None:
        without_season = dataclasses.replace(profile, seasonal=False)
        found = feasible_plan(n, horizon, origins, 1, training=SIMPLE_TRAINING)
        if found is None:
            notes.append(
                FitWarning(
                    "no_backtest",
                    f"with {n} points the series is too short for any backtest; the naive "
                    "forecast (the last value) is returned and its accuracy is unknown",
                )
            )
            return Cuts(None, without_season, True, tuple(notes))
        dropped = ", its season left out," if profile.seasonal else ""
        notes.append(
            FitWarning(
                "simple_families_only",
                f"with {n} points the series is too short to compare the full set of models; "
                f"only the simple ones{dropped} were compared (naive, mean, simple "
                "exponential smoothing, Theta)",
            )
        )
        profile = without_season
    plan, shortened = found
    if shortened:
        notes.append(
            FitWarning(
                "backtest_horizon_shortened",
                f"the series is too short to backtest {horizon} steps ahead; candidates were "
                f"compared {plan.horizon} steps ahead instead",
            )
        )
    return Cuts(plan, profile, simple, tuple(notes))


def simple_candidates() -> CandidateSet:
    """The families a very short series is left with."""
    specs = (NaiveSpec(), MeanSpec(), EtsSpec("add", "none", False, "none"), ThetaSpec("never"))
    reasons = ("benchmark", "short series", "short series", "short series")
    return CandidateSet(specs, reasons)


def modelled_periods(specs: Sequence[Specification]) -> tuple[float, ...]:
    """The periods the candidates name in ``periods`` (MSTL, harmonic regression, also inside
    a transform), the most of them; empty when none does."""
    found: tuple[float, ...] = ()
    for spec in specs:
        inner = getattr(spec, "base", spec) if spec.family == "transformed" else spec
        periods = tuple(float(p) for p in getattr(inner, "periods", None) or ())
        if len(periods) > len(found) or (len(periods) == len(found) and periods > found):
            found = periods
    return found
