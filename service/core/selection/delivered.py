"""The delivered model: the chosen members as fitted on the whole series, combined."""

from __future__ import annotations

from collections.abc import Sequence
from typing import cast

import pandas as pd

from service.core.evaluation.records import ModelBacktest
from service.core.models.base import Fitted, Specification, family_of
from service.core.models.combination import CombinationFitted, CombinationSpec
from service.core.selection.candidates import SeriesProfile


def model_periods(specs: Sequence[Specification], profile: SeriesProfile) -> list[int]:
    """Seasonal naive and STL see the true period; the rest the profile's model period."""
    out = []
    for s in specs:
        full = family_of(s) in ("seasonal_naive", "stl")
        out.append(profile.benchmark_period if full else profile.model_period)
    return out


def settle(spec: Specification) -> str:
    """Where a candidate's structure is settled (``Task.settle``): ARIMA's orders before the
    first origin (a second order search cost more than the rest of auto), the other families'
    structure on the whole series (settled on the early part alone they forecast worse)."""
    return "early" if family_of(spec) == "arima" else "whole"


def delivered(
    y: pd.Series,
    members: Sequence[ModelBacktest],
    weights: Sequence[float],
    periods: Sequence[int],
) -> Fitted:
    """The members as the backtest fitted them on the whole series, weighted.

    They make the registry's combination family, its specification listing the structures
    the members settled on; members needing different periods (STL beside non-seasonal
    models) keep their own, and the residual check uses the longest."""
    fits = [m.delivered for m in members]
    if len(fits) == 1:
        return cast(Fitted, fits[0])
    total = float(sum(weights)) if weights else 0.0
    shares = tuple(w / total for w in weights) if total > 0 else tuple(1 / len(fits) for _ in fits)
    spec = CombinationSpec(members=tuple(m.resolved for m in members), weights=shares)
    return cast(Fitted, CombinationFitted.of(spec, y, max(periods), fits, 0.0))
