"""Stacked combination weights: the weights that make the combination itself score best.

Stacking (Wolpert 1992; Breiman 1996, with non-negative weights) fits the weights to the
members' backtest forecasts jointly, so two members that miss on opposite sides can both
keep a say, while weights from each member's own score cannot see that. The loss is the one
the ranking uses by default, whatever the metric asked for (as the majority test in choice.py):
absolute errors scaled by each origin's MASE scale, pooled over every origin and step.
Minimising it over weights >= 0 that sum to one is a linear program (least absolute
deviations on the simplex), solved by scipy's HiGHS.

Weights fitted to a few overlapping windows are noisy (the forecast combination puzzle:
Smith & Wallis 2009), so choice.py only blends them with the inverse-square weights.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np

from service.core.evaluation.records import ModelBacktest

MAX_ROWS = 1000
"""Longer backtests (long horizons of minute data) are thinned evenly to this many rows: the
program's time grows faster than its rows (0.02 s at 480 rows, 0.3 s at 2,880, 3.3 s at
10,000 with six members)."""


def stacking_rows(members: Sequence[ModelBacktest]) -> tuple[np.ndarray, np.ndarray]:
    """The members' scaled points (one column each) and the scaled actual values, one row per
    origin and step where the actual value, the scale and every member's point are finite."""
    columns: list[np.ndarray] = []
    targets: list[np.ndarray] = []
    for k, first in enumerate(members[0].forecasts):
        scale = first.scale
        if not (np.isfinite(scale) and scale > 0):
            continue
        points = np.array([m.forecasts[k].point for m in members], dtype=float).T
        keep = np.isfinite(first.actual) & np.all(np.isfinite(points), axis=1)
        columns.append(points[keep] / scale)
        targets.append(first.actual[keep] / scale)
    if not columns:
        return np.empty((0, len(members))), np.empty(0)
    return np.vstack(columns), np.concatenate(targets)


def stacked_weights(members: Sequence[ModelBacktest]) -> tuple[float, ...] | None:
    """Weights >= 0 summing to one that minimise the combination's pooled scaled absolute
    error in the backtest; None when nothing is scored or the solver fails.

    The program: minimise sum(u + v) subject to X w + u - v = t, sum(w) = 1, w, u, v >= 0
    (u and v are each row's error above and below the actual value)."""
    # Imported here: the HTTP server imports the selection's rules but must not load scipy.
    from scipy import sparse
    from scipy.optimize import linprog

    x, t = stacking_rows(members)
    if t.size > MAX_ROWS:
        keep = np.unique(np.linspace(0, t.size - 1, MAX_ROWS).round().astype(int))
        x, t = x[keep], t[keep]
    rows, count = x.shape
    if rows == 0 or count == 0:
        return None
    identity = sparse.identity(rows, format="csr")
    fit = sparse.hstack([sparse.csr_matrix(x), identity, -identity])
    total = sparse.hstack(
        [sparse.csr_matrix(np.ones((1, count))), sparse.csr_matrix((1, 2 * rows))]
    )
    result = linprog(
        np.concatenate([np.zeros(count), np.ones(2 * rows)]),
        A_eq=sparse.vstack([fit, total], format="csr"),
        b_eq=np.concatenate([t, [1.0]]),
        bounds=(0, None),
        method="highs",
    )
    if not result.success:
        return None
    w = np.clip(np.asarray(result.x[:count], dtype=float), 0.0, None)
    if not np.isfinite(w).all() or w.sum() <= 0:
        return None
    return tuple(float(v) for v in w / w.sum())
