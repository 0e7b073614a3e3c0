"""A seasonal ARIMA order and what follows from it alone: differencing, the regression
columns, coefficient names, the expanded lag polynomials and the information criteria."""

from __future__ import annotations

import math
from dataclasses import dataclass, replace
from typing import Protocol

import numpy as np

from service.core.models.base import FitWarning
from service.core.models.labels import model_label

EFFORTS: dict[str, str] = {
    "thorough": "CSS-screened stepwise walk, then an exact walk around the exact winner",
    "quick": "stepwise walk on CSS AICc, exact fits of the two best CSS orders only",
}
"""The order searches a specification may ask for (``model.search``), with what each does."""


@dataclass(frozen=True)
class ArimaOrders:
    """A seasonal ARIMA order with its seasonal period and whether a constant is included."""

    p: int
    d: int
    q: int
    P: int = 0
    D: int = 0
    Q: int = 0
    m: int = 1
    constant: bool = False

    @property
    def label(self) -> str:
        """Box and Jenkins notation (``ARIMA(0,1,1)x(0,1,1)12``), then the constant in words."""
        return model_label(
            "arima",
            period=self.m,
            orders=(self.p, self.d, self.q),
            seasonal_orders=(self.P, self.D, self.Q),
            constant=("mean" if self.d + self.D == 0 else "drift") if self.constant else "none",
        )

    @property
    def constant_name(self) -> str:
        """``intercept`` (the mean) without differencing, ``drift`` (slope per step) with one."""
        return "intercept" if self.d + self.D == 0 else "drift"

    @property
    def arma_count(self) -> int:
        """Number of AR and MA coefficients, seasonal ones included."""
        return self.p + self.q + self.P + self.Q

    def with_constant(self, constant: bool) -> ArimaOrders:
        """The same orders with the constant switched on or off."""
        return replace(self, constant=constant)


@dataclass(frozen=True)
class Estimate:
    """Estimated coefficients of one order and its likelihood-based criteria (differenced scale)."""

    orders: ArimaOrders
    names: tuple[str, ...]
    values: tuple[float, ...]
    sigma2: float
    loglik: float
    observations: int
    aic: float
    aicc: float
    bic: float
    method: str
    converged: bool
    iterations: int
    warnings: tuple[FitWarning, ...] = ()

    @property
    def parameters(self) -> dict[str, float]:
        """Coefficients by name, σ² last."""
        return {**dict(zip(self.names, self.values, strict=True)), "sigma2": self.sigma2}


def difference(x: np.ndarray, d: int, D: int, m: int) -> np.ndarray:
    """Apply (1 − L)^d (1 − L^m)^D along the first axis; the first d + mD rows are lost."""
    out = np.asarray(x, dtype=float)
    for _ in range(d):
        out = out[1:] - out[:-1]
    for _ in range(D):
        out = out[m:] - out[:-m]
    return out


def deterministic_columns(orders: ArimaOrders, start: int, length: int) -> np.ndarray | None:
    """The constant's column for time steps start+1 .. start+length (None without constant)."""
    if not orders.constant:
        return None
    if orders.d + orders.D == 0:
        return np.ones((length, 1))
    return np.arange(start + 1, start + length + 1, dtype=float).reshape(-1, 1)


def design_matrix(
    orders: ArimaOrders, regressors: np.ndarray | None, start: int, length: int
) -> np.ndarray | None:
    """Constant column (if any) followed by the regressors, rows start .. start+length-1."""
    parts = []
    constant = deterministic_columns(orders, start, length)
    if constant is not None:
        parts.append(constant)
    if regressors is not None and regressors.shape[1] > 0:
        parts.append(np.asarray(regressors, dtype=float).reshape(length, -1))
    return np.hstack(parts) if parts else None


def coefficient_names(orders: ArimaOrders, regressor_names: tuple[str, ...]) -> tuple[str, ...]:
    """Names in SARIMAX parameter order: regression, ar, ma, seasonal ar, seasonal ma."""
    names: list[str] = [orders.constant_name] if orders.constant else []
    names += list(regressor_names)
    names += [f"ar{i}" for i in range(1, orders.p + 1)]
    names += [f"ma{i}" for i in range(1, orders.q + 1)]
    names += [f"seasonal_ar{i}" for i in range(1, orders.P + 1)]
    names += [f"seasonal_ma{i}" for i in range(1, orders.Q + 1)]
    return tuple(names)


class LagOrders(Protocol):
    """The orders of the four lag polynomials and the seasonal period, by name."""

    @property
    def p(self) -> int: ...

    @property
    def q(self) -> int: ...

    @property
    def P(self) -> int: ...

    @property
    def Q(self) -> int: ...

    @property
    def m(self) -> int: ...


def lag_polynomials(orders: LagOrders, arma: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """The expanded AR polynomial φ(L)Φ(L^m) and MA polynomial θ(L)Θ(L^m), increasing powers."""
    p, q, P, Q, m = orders.p, orders.q, orders.P, orders.Q, orders.m
    ar, ma = arma[:p], arma[p : p + q]
    sar, sma = arma[p + q : p + q + P], arma[p + q + P :]
    seasonal_ar = np.zeros(m * P + 1)
    seasonal_ar[0] = 1.0
    seasonal_ar[m::m] = -sar
    seasonal_ma = np.zeros(m * Q + 1)
    seasonal_ma[0] = 1.0
    seasonal_ma[m::m] = sma
    ar_poly = np.convolve(np.concatenate(([1.0], -ar)), seasonal_ar)
    ma_poly = np.convolve(np.concatenate(([1.0], ma)), seasonal_ma)
    return ar_poly, ma_poly


def roots_outside_unit_circle(poly: np.ndarray, margin: float = 1e-3) -> bool:
    """True when every root of the lag polynomial lies outside the unit circle (stationary)."""
    return bool(smallest_root(poly) > 1.0 + margin)


def smallest_root(poly: np.ndarray) -> float:
    """The smallest modulus among the lag polynomial's roots (infinite for a constant)."""
    trimmed = np.trim_zeros(poly, "b")
    if trimmed.size <= 1:
        return math.inf
    return float(np.min(np.abs(np.roots(trimmed[::-1]))))


def information_criteria(loglik: float, k: int, n: int) -> tuple[float, float, float]:
    """AIC, AICc and BIC (statsmodels' definitions) with k estimated parameters (σ² included)
    on n observations; AICc is infinite when n <= k + 1."""
    from statsmodels.tools import eval_measures

    small_sample = float(eval_measures.aicc(loglik, n, k)) if n - k - 1 > 0 else math.inf
    return (
        float(eval_measures.aic(loglik, n, k)),
        small_sample,
        float(eval_measures.bic(loglik, n, k)),
    )
