"""Exact Gaussian likelihood of a stationary ARMA through its autocovariance matrix.

The same likelihood as a Kalman filter with a stationary start (what SARIMAX computes on
the differenced series), but a few dense LAPACK calls per evaluation instead of a filter
step per observation (faster at short lengths; figures in tests/benchmarks/RESULTS.md).
The regression coefficients
and σ² are concentrated out by generalised least squares, so the optimiser sees only the
ARMA coefficients, kept stationary and invertible by Monahan's (1984) transform. The
dense Cholesky costs O(n³): beyond ``DENSE_LIMIT`` observations callers use the filter.
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass

import numpy as np
from scipy import linalg, optimize, signal
from scipy.linalg import lapack
from statsmodels.tsa.statespace.tools import (
    constrain_stationary_univariate,
    unconstrain_stationary_univariate,
)

from service.core.models.arima.orders import lag_polynomials, smallest_root

DENSE_LIMIT = 250
"""Differenced points up to which the dense likelihood is used, below where the filter
overtakes it (the crossing is measured in tests/benchmarks/RESULTS.md)."""
BOUNDARY_AFTER = 15
"""Iterations after which a fit creeping along the admissible region's edge may stop."""
BOUNDARY_WINDOW = 5
BOUNDARY_GAIN = 0.005
"""Log-likelihood gained over the last BOUNDARY_WINDOW iterations below which a fit whose
lag polynomials have a root within BOUNDARY_MODULUS of the unit circle stops: its supremum
lies on the boundary, which the transformed coefficients approach without converging."""
BOUNDARY_MODULUS = 1.02


@dataclass(frozen=True)
class ArmaShape:
    """Orders of the four lag polynomials and the seasonal period."""

    p: int
    q: int
    P: int
    Q: int
    m: int


@dataclass(frozen=True)
class DenseFit:
    """Maximum-likelihood ARMA coefficients, the concentrated regression and σ², and how it went."""

    arma: np.ndarray
    beta: np.ndarray
    sigma2: float
    loglik: float
    converged: bool
    evaluations: int


def autocovariances(ar_poly: np.ndarray, ma_poly: np.ndarray, nobs: int) -> np.ndarray:
    """γ(0..nobs-1) of φ(L)x = θ(L)e with unit innovation variance (Brockwell & Davis 3.3).

    Solves for the first max(p, q) + 1 lags exactly, then runs the AR recursion.
    """
    p, q = ar_poly.size - 1, ma_poly.size - 1
    k = max(p, q) + 1
    impulse = np.zeros(k)
    impulse[0] = 1.0
    psi = signal.lfilter(ma_poly, ar_poly, impulse)
    # b_j = Σ_i θ_{j+i} ψ_i and the filter state below are correlations: one call each instead
    # of a Python loop over the lags.
    b = np.zeros(k)
    b[: q + 1] = np.correlate(ma_poly, psi[: q + 1], mode="full")[q:]
    flat, cols = _yule_walker_layout(k, p)
    a = np.bincount(flat, weights=ar_poly[cols], minlength=k * k).reshape(k, k)
    gamma = np.zeros(max(nobs, k))
    gamma[:k] = np.linalg.solve(a, b)
    if nobs > k and p:
        # lfilter's state for past outputs γ(k-1), ..., γ(k-p) of the all-pole recursion.
        past = gamma[k - 1 :: -1][:p]
        zi = -np.correlate(ar_poly[1:], past, mode="full")[p - 1 :]
        gamma[k:] = signal.lfilter([1.0], ar_poly, np.zeros(nobs - k), zi=zi)[0]
    return gamma[:nobs]


@functools.lru_cache(maxsize=64)
def _yule_walker_layout(k: int, p: int) -> tuple[np.ndarray, np.ndarray]:
    """Flat positions (row, |row - lag|) and lags of the AR terms in the first k equations."""
    rows, cols = np.meshgrid(np.arange(k), np.arange(p + 1), indexing="ij")
    flat = (rows * k + np.abs(rows - cols)).ravel()
    return flat, cols.ravel()


def _blocks(shape: ArmaShape) -> tuple[tuple[int, int, float], ...]:
    """(start, length, sign) of each polynomial block; MA blocks flip sign (θ = -φ form)."""
    out, at = [], 0
    for length, sign in ((shape.p, 1.0), (shape.q, -1.0), (shape.P, 1.0), (shape.Q, -1.0)):
        out.append((at, length, sign))
        at += length
    return tuple(out)


def constrain(shape: ArmaShape, free: np.ndarray) -> np.ndarray:
    """Unconstrained optimiser values to stationary AR and invertible MA coefficients."""
    out = np.empty_like(free)
    for at, length, sign in _blocks(shape):
        if length:
            out[at : at + length] = sign * constrain_stationary_univariate(free[at : at + length])
    return out


def unconstrain(shape: ArmaShape, arma: np.ndarray) -> np.ndarray:
    """Inverse of ``constrain`` (the coefficients must be admissible)."""
    out = np.empty_like(arma)
    for at, length, sign in _blocks(shape):
        if length:
            block = sign * arma[at : at + length]
            out[at : at + length] = unconstrain_stationary_univariate(block)
    return out


@dataclass(frozen=True)
class _Profile:
    loglik: float
    beta: np.ndarray
    sigma2: float


def profile(
    shape: ArmaShape, arma: np.ndarray, w: np.ndarray, x: np.ndarray | None, finite: np.ndarray
) -> _Profile:
    """Log-likelihood with β and σ² at their GLS optimum for these ARMA coefficients."""
    ar_poly, ma_poly = lag_polynomials(shape, arma)
    gamma = autocovariances(ar_poly, ma_poly, w.size)
    cov = linalg.toeplitz(gamma)
    if not finite.all():
        cov = cov[np.ix_(finite, finite)]
    # LAPACK directly: the checked wrappers cost as much as the factorisation at n = 200.
    factor, info = lapack.dpotrf(cov, lower=1, clean=1, overwrite_a=1)
    if info != 0:
        raise np.linalg.LinAlgError("autocovariance matrix not positive definite")
    rhs = w[finite, None] if x is None else np.column_stack((w[finite], x[finite]))
    solved, info = lapack.dtrtrs(factor, rhs, lower=1)
    if info != 0:
        raise np.linalg.LinAlgError("singular autocovariance factor")
    z = solved[:, 0]
    beta = np.zeros(0)
    if x is not None:
        zx = solved[:, 1:]
        beta = np.linalg.solve(zx.T @ zx, zx.T @ z)
        z = z - zx @ beta
    n = z.size
    sigma2 = float(z @ z) / n
    logdet = 2.0 * float(np.sum(np.log(np.diag(factor))))
    loglik = -0.5 * n * (math.log(2.0 * math.pi * sigma2) + 1.0) - 0.5 * logdet
    return _Profile(loglik, beta, sigma2)


class _BoundaryStop:
    """L-BFGS-B callback that ends a fit creeping towards a unit root, where the transformed
    coefficients grow without bound and the fit runs to its iteration cap for a few
    thousandths of log-likelihood (tests/benchmarks/RESULTS.md). Such a stop counts as
    converged: the supremum lies on the boundary, and the estimate is that close to it."""

    def __init__(self, shape: ArmaShape, n: int) -> None:
        self.shape, self.n = shape, n
        self.values: list[float] = []
        self.stopped = False

    def __call__(self, intermediate_result: optimize.OptimizeResult) -> None:
        self.values.append(float(intermediate_result.fun))
        done = len(self.values)
        if done < BOUNDARY_AFTER or done <= BOUNDARY_WINDOW:
            return
        gain = (self.values[-1 - BOUNDARY_WINDOW] - self.values[-1]) * self.n
        if gain >= BOUNDARY_GAIN:
            return
        ar_poly, ma_poly = lag_polynomials(self.shape, constrain(self.shape, intermediate_result.x))
        if min(smallest_root(ar_poly), smallest_root(ma_poly)) < BOUNDARY_MODULUS:
            self.stopped = True
            raise StopIteration


def dense_fit(
    shape: ArmaShape,
    w: np.ndarray,
    x: np.ndarray | None,
    start: np.ndarray,
    maxiter: int,
    tight: bool,
) -> DenseFit:
    """Maximise the exact likelihood over the ARMA coefficients from an admissible ``start``.

    Raises ArithmeticError when the likelihood cannot be evaluated.
    """
    w = np.asarray(w, dtype=float)
    finite = np.isfinite(w)
    w = np.where(finite, w, 0.0)
    n = int(finite.sum())
    evaluations = 0

    def objective(free: np.ndarray) -> float:
        nonlocal evaluations
        evaluations += 1
        try:
            found = profile(shape, constrain(shape, free), w, x, finite)
        except (np.linalg.LinAlgError, ValueError):
            return 1e10
        return -found.loglik / n if math.isfinite(found.loglik) else 1e10

    free0 = unconstrain(shape, np.asarray(start, dtype=float))
    converged = True
    if free0.size:
        options = {"maxiter": maxiter, "gtol": 1e-8 if tight else 1e-5}
        if tight:
            options["ftol"] = 1e-13
        # A tight (final) fit runs to its own tolerance; the others may stop at the boundary.
        edge = None if tight else _BoundaryStop(shape, n)
        with np.errstate(all="ignore"):
            solution = optimize.minimize(
                objective, free0, method="L-BFGS-B", options=options, callback=edge
            )
        stopped = edge is not None and edge.stopped
        free0, converged = solution.x, bool(solution.success) or stopped
    arma = constrain(shape, free0)
    try:
        found = profile(shape, arma, w, x, finite)
    except (np.linalg.LinAlgError, ValueError) as exc:
        raise ArithmeticError(f"exact likelihood failed: {exc}") from exc
    if not math.isfinite(found.loglik):
        raise ArithmeticError("non-finite exact log-likelihood")
    return DenseFit(arma, found.beta, found.sigma2, found.loglik, converged, evaluations)
