"""Where rolling origins sit: for POST /v1/backtests, for the selection and for calibration.

An origin is the position of the first forecast step; the last one always leaves exactly
``horizon`` points, and the data before the first origin is all a candidate is estimated on.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from service.core.checks import check_positive_int
from service.core.errors import FieldProblem, RequestError

CALIBRATION_ORIGINS = 8
SIMPLE_TRAINING = 4
"""Fewest points before the first origin when only the simple families are compared."""
MINIMUM_ORIGINS = 5
"""Fewer calibration origins than this and the model's own intervals are returned unadjusted."""


def minimum_training(seasonal_period: int) -> int:
    """Fewest points before the first origin: two full seasons plus two, and never under 10."""
    return max(10, 2 * seasonal_period + 2)


@dataclass(frozen=True)
class Plan:
    """Where the rolling origins sit: positions of the first forecast step, ascending."""

    origins: tuple[int, ...]
    horizon: int
    step: int


def plan_origins(n: int, horizon: int, origins: int, step: int, seasonal_period: int = 1) -> Plan:
    """Origins at n−h, n−h−step, ...; too little data before the first -> RequestError."""
    check_positive_int(horizon, "horizon")
    check_positive_int(origins, "origins")
    check_positive_int(step, "step")
    first = n - horizon - step * (origins - 1)
    need = minimum_training(seasonal_period)
    if first < need:
        message = (
            f"{n} points leave {first} before the first origin, fewer than the {need} needed "
            f"for origins={origins}, horizon={horizon}, step={step}; lower one of them"
        )
        problems = [FieldProblem(name, message) for name in ("origins", "horizon", "step")]
        raise RequestError(message, problems=problems)
    return Plan(tuple(first + step * k for k in range(origins)), horizon, step)


def selection_training(seasonal_period: int) -> int:
    """Fewest points before the first selection origin: max(10, 3m) for seasonal series."""
    if seasonal_period > 1:
        return max(minimum_training(seasonal_period), 3 * seasonal_period)
    return minimum_training(seasonal_period)


def selection_plan(
    n: int, horizon: int, origins: int, seasonal_period: int, training: int | None = None
) -> Plan | None:
    """The widest honest plan: step = horizon if it fits, else smaller, then fewer origins.

    Seasonal candidates get three full seasons before the first origin: with two, AICc
    rejects every seasonal model for its initial states and the ranking says nothing.
    ``training`` overrides that minimum (short series).
    """
    need = training if training is not None else selection_training(seasonal_period)
    for k in range(origins, 0, -1):
        for step in range(horizon, 0, -1):
            first = n - horizon - step * (k - 1)
            if first >= need:
                return Plan(tuple(first + step * j for j in range(k)), horizon, step)
            if k == 1:
                break
    return None


NEW_DATA_SHARE = 0.02
"""The selection estimates its candidates again at a later origin only when the points added
since their latest estimate are at least this share of the points that estimate used: on long
series the parameters barely move while the fits cost most (RESULTS.md)."""


def estimated_again_at(plan: Plan, share: float = NEW_DATA_SHARE) -> tuple[int, ...]:
    """The selection origins after the first where the candidates are estimated again."""
    out: list[int] = []
    latest = plan.origins[0]
    for origin in plan.origins[1:]:
        if origin - latest >= share * latest:
            out.append(origin)
            latest = origin
    return tuple(out)


def feasible_plan(
    n: int, horizon: int, origins: int, period: int, training: int | None = None
) -> tuple[Plan, bool] | None:
    """The selection plan at the requested horizon, else at the longest horizon that fits
    (True beside it when shortened); None when not even one step fits."""
    for h in range(horizon, 0, -1):
        plan = selection_plan(n, h, origins, period, training)
        if plan is not None:
            return plan, h < horizon
    return None


def calibration_plan(
    n: int, horizon: int, seasonal_period: int, first: int | None = None
) -> Plan | None:
    """Up to 8 origins for calibration; None when fewer than ``calibration.MINIMUM_ORIGINS`` fit.

    With ``first`` (the selection's first origin) the origins lie between it and n − h, so the
    models estimated for the selection serve unchanged; otherwise they start where at least
    half the series is left for estimation, a quarter-horizon (or one step) apart.
    """
    last = n - horizon
    if first is not None:
        span = last - first
        if span <= 0:
            return None
        step = max(1, math.ceil(span / (CALIBRATION_ORIGINS - 1)))
        origins = tuple(range(last, first - 1, -step))[::-1]
        return Plan(origins, horizon, step) if len(origins) >= MINIMUM_ORIGINS else None
    need = max(minimum_training(seasonal_period), n // 2)
    for k in range(CALIBRATION_ORIGINS, MINIMUM_ORIGINS - 1, -1):
        for step in sorted({max(1, horizon // 4), 1}, reverse=True):
            start = last - step * (k - 1)
            if start >= need:
                return Plan(tuple(start + step * j for j in range(k)), horizon, step)
    return None


def dense_plan(plan: Plan, extra: Plan | None) -> Plan:
    """The selection plan with the calibration origins added (same horizon)."""
    if extra is None:
        return plan
    return Plan(tuple(sorted({*plan.origins, *extra.origins})), plan.horizon, plan.step)
