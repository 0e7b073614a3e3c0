"""Estimation of one seasonal ARIMA order: a cheap conditional-sum-of-squares fit and an exact one.

Both work on the differenced series (simple differencing), so every candidate of one search
shares one likelihood and one initialisation and their AICc values are comparable
(tests/reference/README.md, trap 1). The constant is a regression column: an intercept (the
mean) when d + D = 0, a time index (the drift per step) when d + D = 1, as regression with
ARIMA errors.
"""

from __future__ import annotations

import math
from collections.abc import Callable

import numpy as np
from scipy import optimize, signal
from statsmodels.tsa.statespace.sarimax import SARIMAX

from service.core.data.filling import interpolate_gaps
from service.core.models.arima.likelihood import DENSE_LIMIT, ArmaShape, dense_fit
from service.core.models.arima.orders import (
    ArimaOrders,
    Estimate,
    coefficient_names,
    information_criteria,
    lag_polynomials,
    roots_outside_unit_circle,
    smallest_root,
)
from service.core.models.base import FitWarning
from service.core.models.library_warnings import captured

CSS_EVALUATIONS = 30
"""Residual evaluations per coefficient a CSS fit may use: more than converged fits need."""
CSS_WANDER_AFTER = 5
"""Residual evaluations per coefficient after which a CSS fit is watched for wandering."""
CSS_WANDER_MODULUS = 0.8
"""A watched CSS fit whose best point so far has an AR or MA root of smaller modulus stops as
not converged: on the accuracy rows' searches every such fit went on to the evaluation cap
without converging (no converged fit ended below 0.80; tests/benchmarks/RESULTS.md), and a
CSS fit that does not converge scores an infinite AICc wherever it stops."""
CSS_SOLVER = "trf"
"""scipy's trust-region least squares for the CSS fits. Its Levenberg-Marquardt ("lm",
MINPACK) took different steps from identical inputs in different processes (scipy 1.17.1),
so the ARIMA orders chosen depended on the process (tests/benchmarks/RESULTS.md)."""


def css_estimate(
    w: np.ndarray,
    xd: np.ndarray | None,
    orders: ArimaOrders,
    regressor_names: tuple[str, ...],
    score_from: int = 0,
) -> Estimate:
    """Conditional sum of squares fit (residuals conditioned on the first p + mP values).

    A few milliseconds per order through ``scipy.signal.lfilter``. Squares are summed from
    ``score_from`` on (at least p + mP), so that orders of one search are scored on the same
    observations; the log-likelihood is scaled to all differenced observations.
    """
    w = interpolate_gaps(w)
    n = w.size
    k_exog = 0 if xd is None else xd.shape[1]
    beta0 = np.zeros(k_exog)
    if xd is not None:
        beta0 = np.linalg.lstsq(xd, w, rcond=None)[0]
    x0 = np.r_[beta0, np.zeros(orders.arma_count)]
    ncond = orders.p + orders.m * orders.P
    skip = max(0, score_from - ncond)

    # The solver asks for the Jacobian at the point whose residuals it has just computed: the
    # demeaned series, polynomials and residuals of the last point are kept for it.
    last: dict[str, np.ndarray] = {}

    def residuals(x: np.ndarray) -> np.ndarray:
        u = w - xd @ x[:k_exog] if xd is not None else w
        ar_poly, ma_poly = lag_polynomials(orders, x[k_exog:])
        v = np.convolve(u, ar_poly, mode="valid")
        e = np.asarray(signal.lfilter([1.0], ma_poly, v))
        last.update(x=x.copy(), u=u, ar=ar_poly, ma=ma_poly, e=e)
        return e[skip:]

    def jacobian(x: np.ndarray) -> np.ndarray:
        if "x" not in last or not np.array_equal(last["x"], x):
            residuals(x)
        return _css_jacobian(xd, orders, x[k_exog:], last, skip)

    names = coefficient_names(orders, regressor_names)
    if x0.size and n - max(ncond, score_from) > x0.size:
        # CSS_EVALUATIONS per coefficient is above what converged fits need; the fits that
        # reach it wander with a non-invertible MA (figures in tests/benchmarks/RESULTS.md).
        watch = _Wandering(orders, k_exog, residuals, CSS_WANDER_AFTER * x0.size)
        try:
            with np.errstate(all="ignore"):
                solution = optimize.least_squares(
                    watch, x0, jac=jacobian, method=CSS_SOLVER, max_nfev=CSS_EVALUATIONS * x0.size
                )
            x, iterations, converged = solution.x, int(solution.nfev), bool(solution.success)
        except _Wandered:
            x, iterations, converged = watch.best, watch.evaluations, False
    else:
        x, iterations, converged = x0, 0, True
    e = residuals(x)
    sigma2 = float(np.mean(e**2)) if e.size else math.nan
    valid = converged and np.isfinite(sigma2) and sigma2 > 0
    loglik = -0.5 * n * (math.log(2 * math.pi * sigma2) + 1.0) if valid else -math.inf
    k = x.size + 1
    aic, aicc, bic = information_criteria(loglik, k, n)
    return Estimate(
        orders,
        names,
        tuple(float(v) for v in x),
        sigma2,
        loglik,
        n,
        aic,
        aicc,
        bic,
        "css",
        bool(valid),
        iterations,
    )


class _Wandered(Exception):
    """A CSS fit left the region where it could converge (see ``_Wandering``)."""


class _Wandering:
    """The CSS residuals as the solver sees them, watched: after ``after`` evaluations a fit
    whose best point has a root inside modulus CSS_WANDER_MODULUS raises ``_Wandered``."""

    def __init__(
        self,
        orders: ArimaOrders,
        k_exog: int,
        residuals: Callable[[np.ndarray], np.ndarray],
        after: int,
    ) -> None:
        self.orders, self.k_exog, self.residuals, self.after = orders, k_exog, residuals, after
        self.evaluations = 0
        self.best = np.zeros(0)
        self.best_cost = math.inf
        self.checked = True

    def __call__(self, x: np.ndarray) -> np.ndarray:
        e = self.residuals(x)
        self.evaluations += 1
        cost = float(e @ e)
        if cost < self.best_cost:
            self.best, self.best_cost, self.checked = x.copy(), cost, False
        if self.evaluations >= self.after and not self.checked:
            self.checked = True
            ar_poly, ma_poly = lag_polynomials(self.orders, self.best[self.k_exog :])
            if min(smallest_root(ar_poly), smallest_root(ma_poly)) < CSS_WANDER_MODULUS:
                raise _Wandered
        return e


def _css_jacobian(
    xd: np.ndarray | None,
    orders: ArimaOrders,
    arma: np.ndarray,
    at: dict[str, np.ndarray],
    skip: int,
) -> np.ndarray:
    """Analytic derivatives of the CSS residuals at the point ``at`` (demeaned series ``u``,
    polynomials ``ar`` and ``ma``, residuals ``e``): numerical ones cost k + 1 residual
    evaluations per step. The regression and AR columns share one filter call."""
    p, q, P, Q, m = orders.p, orders.q, orders.P, orders.Q, orders.m
    u, ar_poly, ma_poly, e = at["u"], at["ar"], at["ma"], at["e"]
    regular_ar = np.concatenate(([1.0], -arma[:p]))
    seasonal_ar = np.zeros(m * P + 1)
    seasonal_ar[0] = 1.0
    seasonal_ar[m::m] = -arma[p + q : p + q + P]
    regular_ma = np.concatenate(([1.0], arma[p : p + q]))
    seasonal_ma = np.zeros(m * Q + 1)
    seasonal_ma[0] = 1.0
    seasonal_ma[m::m] = arma[p + q + P :]
    k_exog = 0 if xd is None else xd.shape[1]
    inputs = [np.convolve(-xd[:, k], ar_poly, mode="valid") for k in range(k_exog)]  # type: ignore[index]

    # d(ar_poly)/dφ_i = -L^i Φ(L^m), d(ar_poly)/dΦ_j = -L^(mj) φ(L): padded to ar_poly's length
    # so that the 'valid' convolution has the residuals' length.
    def by_ar(shift: int, other: np.ndarray) -> np.ndarray:
        dpoly = np.zeros(ar_poly.size)
        dpoly[shift : shift + other.size] = -other
        return np.convolve(u, dpoly, mode="valid")

    # θ(L)Θ(L^m) e = v, so d e = -(d ma_poly / ma_poly) e.
    def by_ma(shift: int, other: np.ndarray) -> np.ndarray:
        dpoly = np.zeros(shift + other.size)
        dpoly[shift:] = other
        return -np.asarray(signal.lfilter(dpoly, ma_poly, e))

    inputs += [by_ar(i, seasonal_ar) for i in range(1, p + 1)]
    ar_count = len(inputs)
    inputs += [by_ar(m * j, regular_ar) for j in range(1, P + 1)]
    filtered = signal.lfilter([1.0], ma_poly, np.vstack(inputs)) if inputs else []
    columns = list(filtered[:ar_count])
    columns += [by_ma(i, seasonal_ma) for i in range(1, q + 1)]
    columns += list(filtered[ar_count:])
    columns += [by_ma(m * j, regular_ma) for j in range(1, Q + 1)]
    return np.column_stack(columns)[skip:]


def admissible(estimate: Estimate, margin: float = 1e-3) -> bool:
    """Stationary AR and invertible MA polynomials (required of SARIMAX start values)."""
    k_exog = len(estimate.names) - estimate.orders.arma_count
    arma = np.asarray(estimate.values[k_exog:], dtype=float)
    if not np.all(np.isfinite(arma)):
        return False
    ar_poly, ma_poly = lag_polynomials(estimate.orders, arma)
    return roots_outside_unit_circle(ar_poly, margin) and roots_outside_unit_circle(ma_poly, margin)


def exact_estimate(
    w: np.ndarray,
    xd: np.ndarray | None,
    orders: ArimaOrders,
    regressor_names: tuple[str, ...],
    start: Estimate | None = None,
    maxiter: int = 50,
    tight: bool = False,
) -> Estimate:
    """Exact Gaussian maximum likelihood of the ARMA on the differenced series, σ² concentrated.

    ``start`` warm-starts the optimiser (CSS or exact); ``tight`` asks for the final fit's
    tolerance. Library warnings are returned, not raised; a failure raises ArithmeticError.
    """
    names = coefficient_names(orders, regressor_names)
    n = int(np.isfinite(w).sum())
    if not names:
        return _white_noise(w, orders, n)
    start_params = None
    # An exact estimate, even one stopped by the iteration cap, is the best point found so far
    # and lies inside the admissible region by construction, if only just (a seasonal MA root
    # at 1.00003 is common): restarting from zeros instead found worse optima.
    exact_start = start is not None and start.method == "exact"
    usable = start is not None and (start.converged or exact_start)
    if start is not None and usable and admissible(start, 0.0 if exact_start else 1e-3):
        start_params = np.asarray(start.values, dtype=float)
    if w.size <= DENSE_LIMIT:
        return _dense_estimate(w, xd, orders, names, start_params, maxiter, tight)
    return _filter_estimate(w, xd, orders, names, start_params, maxiter, tight)


def _dense_estimate(
    w: np.ndarray,
    xd: np.ndarray | None,
    orders: ArimaOrders,
    names: tuple[str, ...],
    start_params: np.ndarray | None,
    maxiter: int,
    tight: bool,
) -> Estimate:
    """Exact likelihood through the autocovariance matrix: same optimum as the filter, 2-5 x
    cheaper per fit at n = 200 (tests/benchmarks/arima.py)."""
    k_exog = len(names) - orders.arma_count
    arma0 = np.zeros(orders.arma_count) if start_params is None else start_params[k_exog:]
    shape = ArmaShape(orders.p, orders.q, orders.P, orders.Q, orders.m)
    found = dense_fit(shape, w, xd, arma0, maxiter, tight)
    n = int(np.isfinite(w).sum())
    values = tuple(float(v) for v in np.r_[found.beta, found.arma])
    aic, aicc, bic = information_criteria(found.loglik, len(values) + 1, n)
    return Estimate(
        orders,
        names,
        values,
        found.sigma2,
        found.loglik,
        n,
        aic,
        aicc,
        bic,
        "exact",
        found.converged,
        found.evaluations,
    )


def _filter_estimate(
    w: np.ndarray,
    xd: np.ndarray | None,
    orders: ArimaOrders,
    names: tuple[str, ...],
    start_params: np.ndarray | None,
    maxiter: int,
    tight: bool,
) -> Estimate:
    """Exact likelihood by SARIMAX's Kalman filter: for series too long for a dense matrix."""
    n = int(np.isfinite(w).sum())
    seasonal = (orders.P, 0, orders.Q, orders.m) if orders.P or orders.Q else (0, 0, 0, 0)
    caught: list[FitWarning] = []
    with captured(caught):
        try:
            model = SARIMAX(
                w,
                exog=xd,
                order=(orders.p, 0, orders.q),
                seasonal_order=seasonal,
                trend="n",
                concentrate_scale=True,
            )
            options = {"factr": 1e3, "pgtol": 1e-8} if tight else {}
            result = model.fit(
                start_params=start_params,
                method="lbfgs",
                maxiter=maxiter,
                disp=False,
                cov_type="none",
                **options,
            )
        except (np.linalg.LinAlgError, ValueError, IndexError) as exc:
            raise ArithmeticError(f"{orders.label}: {exc}") from exc
    loglik = float(result.llf)
    if not math.isfinite(loglik):
        raise ArithmeticError(f"{orders.label}: non-finite log-likelihood")
    values = tuple(float(v) for v in np.asarray(result.params))
    k = len(values) + 1
    aic, aicc, bic = information_criteria(loglik, k, n)
    retvals = result.mle_retvals or {}
    return Estimate(
        orders,
        names,
        values,
        float(result.scale),
        loglik,
        n,
        aic,
        aicc,
        bic,
        "exact",
        bool(retvals.get("converged", True)),
        int(retvals.get("iterations", 0)),
        tuple(caught),
    )


def _white_noise(w: np.ndarray, orders: ArimaOrders, n: int) -> Estimate:
    """ARIMA(0,d,0) without constant: the differences are white noise with mean zero."""
    finite = w[np.isfinite(w)]
    sigma2 = float(np.mean(finite**2))
    loglik = -0.5 * n * (math.log(2 * math.pi * sigma2) + 1.0)
    aic, aicc, bic = information_criteria(loglik, 1, n)
    return Estimate(orders, (), (), sigma2, loglik, n, aic, aicc, bic, "exact", True, 0)
