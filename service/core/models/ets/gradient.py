"""ETSModel's optimisation with the same forward differences, without scipy's generic machinery.

statsmodels fits ETS with L-BFGS-B and lets scipy approximate the gradient by forward
differences (``approx_grad``). scipy's ``approx_derivative`` spends longer in its own
bookkeeping (array-API checks, wrappers, generators) than in the likelihood it
differentiates (figures: tests/benchmarks/RESULTS.md). ``ForwardDifferenceFit`` runs the
same L-BFGS-B with a gradient that evaluates the likelihood at exactly the points scipy
would (absolute step 1e-8, the same fallback and the same one-sided turns at the bounds) and
divides exactly as scipy does, so every gradient, every iterate and every fit is
bit-identical (tests/core/models/ets/test_ets_model.py compares with statsmodels' own fit).
"""

from __future__ import annotations

import warnings
from collections.abc import Callable, Sequence
from typing import Any

import numpy as np
from scipy.optimize import fmin_l_bfgs_b
from statsmodels.tools.sm_exceptions import ConvergenceWarning
from statsmodels.tools.tools import Bunch
from statsmodels.tsa.exponential_smoothing.base import StateSpaceMLEModel

STEP = 1e-8
"""fmin_l_bfgs_b's default absolute finite-difference step (``epsilon``)."""
RELATIVE_STEP = float(np.finfo(float).eps) ** 0.5
"""scipy's relative step for forward differences, used where ``x + STEP == x``."""
MAXFUN = 15000
"""fmin_l_bfgs_b's default limit on function evaluations (finite differences included)."""

Objective = Callable[..., float]


class _Evaluations:
    """The objective with its last value remembered (the gradient's f0) and every call counted."""

    def __init__(self, objective: Objective, args: tuple[Any, ...]) -> None:
        self.objective = objective
        self.args = args
        self.count = 0
        self.last_x: np.ndarray | None = None
        self.last_f = 0.0

    def value(self, x: np.ndarray, *args: Any) -> float:
        f = self.objective(x, *args)
        self.count += 1
        self.last_x = np.array(x, dtype=float)
        self.last_f = f
        return f


def forward_gradient(
    evaluations: _Evaluations, lower: np.ndarray, upper: np.ndarray
) -> Callable[..., np.ndarray]:
    """scipy's 2-point ``approx_derivative`` with an absolute step, written out."""

    bounded = not np.all((lower == -np.inf) & (upper == np.inf))

    def gradient(x0: np.ndarray, *args: Any) -> np.ndarray:
        if evaluations.last_x is not None and np.array_equal(x0, evaluations.last_x):
            f0 = evaluations.last_f
        else:
            f0 = evaluations.value(x0, *args)
        sign = (x0 >= 0).astype(float) * 2 - 1
        h = np.where(
            ((x0 + STEP) - x0) == 0, RELATIVE_STEP * sign * np.maximum(1.0, np.abs(x0)), STEP
        )
        if bounded:
            h = _within_bounds(x0, h, lower, upper)
        out = np.empty(x0.size)
        for i in range(x0.size):
            x = x0.copy()
            x[i] = x0[i] + h[i]
            f = evaluations.objective(x, *evaluations.args)
            evaluations.count += 1
            out[i] = (f - f0) / ((x0[i] + h[i]) - x0[i])
        return out

    return gradient


def _within_bounds(
    x0: np.ndarray, h: np.ndarray, lower: np.ndarray, upper: np.ndarray
) -> np.ndarray:
    """scipy's one-sided step adjustment: flip a step that leaves the box, or shorten it."""
    x = x0 + h
    violated = (x < lower) | (x > upper)
    if not violated.any():
        # No step leaves the box: scipy adjusts nothing then, so neither do we.
        return h
    adjusted = h.copy()
    below = x0 - lower
    above = upper - x0
    fitting = np.abs(h) <= np.maximum(below, above)
    adjusted[violated & fitting] *= -1
    forward = (above >= below) & ~fitting
    adjusted[forward] = above[forward]
    backward = (above < below) & ~fitting
    adjusted[backward] = -below[backward]
    return adjusted


def bound_arrays(
    bounds: Sequence[tuple[float | None, float | None]],
) -> tuple[np.ndarray, np.ndarray]:
    """Lower and upper bounds as arrays, None read as unbounded (statsmodels' bounds list)."""
    lower = np.array([-np.inf if lo is None else float(lo) for lo, _ in bounds])
    upper = np.array([np.inf if hi is None else float(hi) for _, hi in bounds])
    return lower, upper


def minimise(
    objective: Objective,
    start: np.ndarray,
    args: tuple[Any, ...],
    bounds: Sequence[tuple[float | None, float | None]],
    maxiter: int,
    callback: Callable[[np.ndarray], Any] | None = None,
) -> tuple[np.ndarray, dict[str, Any]]:
    """L-BFGS-B as statsmodels' ``_fit_lbfgs`` calls it with ``approx_grad``; the estimates and
    statsmodels' ``mle_retvals``."""
    lower, upper = bound_arrays(bounds)
    evaluations = _Evaluations(objective, args)
    stopped = False

    def each_iteration(x: np.ndarray) -> None:
        # scipy counts the difference evaluations against maxfun; it stops at the start of an
        # iteration once they are exceeded, where this stops too.
        nonlocal stopped
        if callback is not None:
            callback(x)
        if evaluations.count > MAXFUN:
            stopped = True
            raise StopIteration

    x, fopt, info = fmin_l_bfgs_b(
        evaluations.value,
        np.asarray(start, dtype=float),
        fprime=forward_gradient(evaluations, lower, upper),
        args=args,
        bounds=list(bounds),
        maxiter=maxiter,
        callback=each_iteration,
    )
    warnflag = 1 if stopped else int(info["warnflag"])
    retvals = {
        "fopt": fopt,
        "gopt": info["grad"],
        "fcalls": evaluations.count,
        "warnflag": warnflag,
        "converged": warnflag == 0,
        "iterations": info["nit"],
    }
    return x, retvals


class ForwardDifferenceFit(StateSpaceMLEModel):  # type: ignore[misc]
    """Placed between ETSModel and its base in a subclass's bases (``class M(ETSModel,
    ForwardDifferenceFit)``), this catches ETSModel.fit's call of the generic likelihood fit
    and runs ``optimise`` (``minimise`` here; a subclass may solve the same problem otherwise)
    instead; any other kind of call goes on to statsmodels."""

    def fit(
        self,
        start_params: Any = None,
        method: str = "newton",
        maxiter: int = 100,
        full_output: bool = True,
        disp: bool = True,
        fargs: tuple[Any, ...] = (),
        callback: Any = None,
        retall: bool = False,
        skip_hessian: bool = False,
        **kwargs: Any,
    ) -> Any:
        own = (
            method == "lbfgs"
            and kwargs.get("approx_grad") is True
            and set(kwargs) == {"approx_grad", "bounds"}
            and skip_hessian
            and full_output
            and not retall
            and start_params is not None
        )
        if not own:
            return super().fit(
                start_params,
                method=method,
                maxiter=maxiter,
                full_output=full_output,
                disp=disp,
                fargs=fargs,
                callback=callback,
                retall=retall,
                skip_hessian=skip_hessian,
                **kwargs,
            )
        x, retvals = self.optimise(start_params, fargs, kwargs["bounds"], maxiter, callback)
        if not retvals["converged"]:
            # statsmodels' own warning, which the fits' warning capture turns into data.
            warnings.warn(
                "Maximum Likelihood optimization failed to converge. Check mle_retvals",
                ConvergenceWarning,
                stacklevel=3,
            )
        settings = {
            "optimizer": method,
            "start_params": start_params,
            "maxiter": maxiter,
            "full_output": full_output,
            "disp": disp,
            "fargs": fargs,
            "callback": callback,
            "retall": retall,
            **kwargs,
        }
        return Bunch(params=x, mle_retvals=retvals, mle_settings=settings)

    def optimise(
        self,
        start: np.ndarray,
        fargs: tuple[Any, ...],
        bounds: Sequence[tuple[float | None, float | None]],
        maxiter: int,
        callback: Callable[[np.ndarray], Any] | None,
    ) -> tuple[np.ndarray, dict[str, Any]]:
        """The estimates and ``mle_retvals`` for ``fit``: ``minimise`` on the likelihood."""
        nobs = self.endog.shape[0]

        def objective(params: np.ndarray, *args: Any) -> float:
            # statsmodels' LikelihoodModel.fit minimises exactly this.
            return -self.loglike(params, *args) / nobs

        return minimise(objective, start, fargs, bounds, maxiter, callback)
