"""The ETS search's exact fits as a least-squares problem, solved by a Gauss-Newton trust region.

With the error variance concentrated out, an ETS log-likelihood is -n/2 log(sum e_t^2) plus a
constant for additive errors, and -n/2 log(sum e_t^2) - sum log|mu_t| for multiplicative
ones (e_t the one-step errors, mu_t the one-step forecasts). The second equals -n/2
log(sum (g e_t)^2) with g the geometric mean of |mu_t|. So the maximum likelihood estimates
minimise the sum of squares of n residuals (``likelihood_residuals``), and a Gauss-Newton
trust-region method (scipy's ``least_squares``, method "trf", the parameters' bounds kept)
uses the residuals' Jacobian where L-BFGS-B only saw the scalar likelihood: the search's
exact fits (10-20 free parameters: smoothing parameters and initial states) end in a few
iterations instead of ~80, at the same or a higher likelihood on most series
(tests/benchmarks/RESULTS.md, 2026-12-03 session 3).
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from typing import Any

import numpy as np
from scipy.optimize import least_squares

from service.core.models.ets.gradient import ForwardDifferenceFit, bound_arrays


def likelihood_residuals(data: np.ndarray, fitted: np.ndarray, multiplicative: bool) -> np.ndarray:
    """Residuals whose sum of squares is a decreasing function of the ETS log-likelihood of
    the one-step forecasts ``fitted`` (non-finite where the likelihood is undefined)."""
    if not multiplicative:
        return data - fitted
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        scale = np.exp(np.add.reduce(np.log(np.abs(fitted))) / fitted.size)
        out: np.ndarray = (data - fitted) / fitted * scale
    return out


def least_squares_fit(
    residuals: Callable[[np.ndarray], np.ndarray],
    start: np.ndarray,
    bounds: Sequence[tuple[float | None, float | None]],
    max_evaluations: int,
) -> tuple[np.ndarray, dict[str, Any]]:
    """Minimise the sum of squares of ``residuals`` within ``bounds`` from ``start`` (clipped
    into them); the solution and statsmodels-style ``mle_retvals``. Forward differences give
    the Jacobian; each parameter is measured in units of its column's norm (``x_scale="jac"``),
    as the initial states of a series in the hundreds sit beside smoothing parameters below
    one. A ValueError when the residuals at the start are not finite."""
    lower, upper = bound_arrays(bounds)
    x0 = np.clip(np.asarray(start, dtype=float), lower, upper)
    calls = 0

    def counted(x: np.ndarray) -> np.ndarray:
        nonlocal calls
        calls += 1
        return residuals(x)

    result = least_squares(
        counted,
        x0,
        bounds=(lower, upper),
        method="trf",
        x_scale="jac",
        max_nfev=max_evaluations,
    )
    converged = bool(result.status > 0)
    retvals = {
        "fopt": float(result.cost),
        "fcalls": calls,
        "iterations": int(result.nfev),
        "status": int(result.status),
        "message": str(result.message),
        "warnflag": 0 if converged else 1,
        "converged": converged,
    }
    return np.asarray(result.x, dtype=float), retvals


class LeastSquaresFit(ForwardDifferenceFit):
    """ETSModel's likelihood fit by ``least_squares_fit`` when ``by_least_squares`` is set (the
    search's exact fits and auto's warm re-estimations); otherwise, and for a call with an
    iteration callback, the forward-difference L-BFGS-B, bit-identical to statsmodels' fit.
    Placed like ForwardDifferenceFit: ``class M(ETSModel, LeastSquaresFit)``."""

    by_least_squares = False

    def optimise(
        self,
        start: np.ndarray,
        fargs: tuple[Any, ...],
        bounds: Sequence[tuple[float | None, float | None]],
        maxiter: int,
        callback: Callable[[np.ndarray], Any] | None,
    ) -> tuple[np.ndarray, dict[str, Any]]:
        if not self.by_least_squares or callback is not None:
            return super().optimise(start, fargs, bounds, maxiter, callback)
        # ETSModel.fit's arguments of its internal likelihood (ets.py, ``_loglike_internal``).
        fitted, states, is_fixed, fixed_values, beta_star, gamma_star = fargs
        is_fixed = np.ascontiguousarray(is_fixed, dtype=np.int64)
        data = np.asarray(self.endog, dtype=float)
        multiplicative = self.error == "mul"

        def residuals(params: np.ndarray) -> np.ndarray:
            self._smoothing_func(
                params, data, fitted, states, is_fixed, fixed_values, beta_star, gamma_star
            )
            return likelihood_residuals(data, fitted, multiplicative)

        return least_squares_fit(residuals, start, bounds, maxiter)
