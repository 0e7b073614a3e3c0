"""The chosen model estimated again on the full series, members screened for plausibility."""

from __future__ import annotations

import time
from collections.abc import Sequence
from typing import cast

import numpy as np
import pandas as pd

from service.core.evaluation.records import ModelBacktest
from service.core.models.base import Fitted, FitWarning, Specification, family_of
from service.core.models.combination import CombinationFitted, CombinationSpec
from service.core.models.labels import model_label
from service.core.selection.averaging import CombinedFitted
from service.core.selection.candidates import SeriesProfile
from service.core.selection.plausibility import implausible


def model_periods(specs: Sequence[Specification], profile: SeriesProfile) -> list[int]:
    """Seasonal naive and STL see the true period; the rest the profile's model period."""
    out = []
    for s in specs:
        full = family_of(s) in ("seasonal_naive", "stl")
        out.append(profile.benchmark_period if full else profile.model_period)
    return out


def for_refit(spec: Specification, backtest: ModelBacktest) -> Specification:
    """ARIMA (on any scale) keeps the orders its search found before the first origin (a second
    search costs more than the rest of auto); ETS searches again in full, its winner's exact
    fit warm-started from the earlier one; the other families search again."""
    if backtest.refit is not None:
        narrowed: Specification = backtest.refit
        return narrowed
    if family_of(spec) == "arima" and backtest.resolved is not None:
        resolved: Specification = backtest.resolved
        return resolved
    return spec


def refit(
    y: pd.Series,
    specs: Sequence[Specification],
    weights: Sequence[float],
    profile: SeriesProfile,
    request: tuple[int, tuple[float, ...]],
) -> tuple[Fitted, list[FitWarning]]:
    """The chosen specification(s) estimated on the full series, without members whose
    forecast for ``request`` (horizon, levels) leaves the plausible band (with a warning).

    A combination whose members share one period becomes the registry's combination family;
    members needing different periods (STL beside non-seasonal models) use a local adapter.
    """
    periods = model_periods(specs, profile)
    if len(specs) == 1:
        return specs[0].fit(y, periods[0]), []
    start = time.perf_counter()
    fits = [s.fit(y, p) for s, p in zip(specs, periods, strict=True)]
    values = y.to_numpy(dtype=float)
    keep, dropped = [], []
    for i, fit in enumerate(fits):
        why = implausible(fit.forecast(*request), values)
        if why is None:
            keep.append(i)
        else:
            name = fit.describe().label
            dropped.append(FitWarning("member_dropped", f"{name} left out of the forecast: {why}"))
    if not keep:
        # Nothing plausible: the best-weighted member answers; its intervals say the rest.
        keep, dropped = [int(np.argmax(weights))], []
    if len(keep) == 1:
        return fits[keep[0]], dropped
    kept_weights = tuple(weights[i] for i in keep)
    if len({periods[i] for i in keep}) == 1:
        spec = CombinationSpec(members=tuple(specs[i] for i in keep), weights=kept_weights)
        members = [fits[i] for i in keep]
        elapsed = time.perf_counter() - start
        combined = CombinationFitted.of(spec, y, periods[keep[0]], members, elapsed)
        return cast(Fitted, combined), dropped
    label = model_label("combination", members=len(keep), weighted=True)
    return CombinedFitted(tuple(fits[i] for i in keep), label, kept_weights), dropped
