"""Weighted combinations of backtests chosen by the selection (fitted models are combined by
the registry's combination family, core/models/combination.py).

Points are averaged with the weights; interval bounds are averaged too, which is quantile
averaging (Lichtendahl, Grushka-Cockayne & Winkler 2013): it keeps the members' shapes and
the calibration step corrects the width afterwards. No weights means equal weights.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

import numpy as np

from service.core.evaluation.records import ModelBacktest, OriginForecast
from service.core.models.labels import model_label


def normalised(weights: Sequence[float] | None, count: int) -> np.ndarray:
    """``weights`` scaled to sum to one; equal weights when None or empty."""
    if not weights:
        return np.full(count, 1.0 / count)
    w = np.asarray(weights, dtype=float)
    return w / w.sum()


def combine(
    members: Sequence[ModelBacktest],
    label: str | None = None,
    weights: Sequence[float] | None = None,
) -> ModelBacktest:
    """Weighted combination of members' backtests: points and bounds averaged per origin.

    Averaging interval bounds is quantile averaging (Lichtendahl, Grushka-Cockayne & Winkler 2013).
    """
    first = members[0]
    w = normalised(weights, len(members))
    forecasts = []
    for k, f in enumerate(first.forecasts):
        parts = [m.forecasts[k] for m in members]
        forecasts.append(
            OriginForecast(
                origin=f.origin,
                actual=f.actual,
                point=w @ np.array([p.point for p in parts]),
                lower={v: w @ np.array([p.lower[v] for p in parts]) for v in first.levels},
                upper={v: w @ np.array([p.upper[v] for p in parts]) for v in first.levels},
                scale=f.scale,
            )
        )
    specification: dict[str, Any] = {
        "family": "combination",
        "members": [m.specification for m in members],
    }
    if weights:
        specification["weights"] = [float(x) for x in w]
    return ModelBacktest(
        specification,
        label or model_label("combination", members=len(members), weighted=bool(weights)),
        tuple(forecasts),
        first.levels,
        sum(m.fit_seconds for m in members),
        sum(m.refilter_seconds for m in members),
    )
