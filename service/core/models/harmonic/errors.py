"""The ARIMA errors of a dynamic harmonic regression: their order by Hannan-Rissanen and
AICc, and the regression coefficients by GLS given them."""

from __future__ import annotations

import warnings
from dataclasses import dataclass

import numpy as np
from scipy import signal
from statsmodels.tsa.arima.estimators.hannan_rissanen import hannan_rissanen

from service.core.models.harmonic.terms import MAX_AR, MAX_MA, aicc
from service.core.models.labels import model_label


@dataclass(frozen=True)
class ErrorModel:
    """ARIMA(p, d, q) errors: the ARMA coefficients (statsmodels' signs) and the variance."""

    p: int
    d: int
    q: int
    ar: tuple[float, ...]
    ma: tuple[float, ...]
    sigma2: float

    @property
    def label(self) -> str:
        return model_label("arima", orders=(self.p, self.d, self.q))


def choose_errors(
    values: np.ndarray, x: np.ndarray, order: tuple[int, int, int] | None = None
) -> ErrorModel:
    """d by the KPSS sequence on the OLS residuals, then ARMA(p, q) by Hannan-Rissanen and AICc.

    A given ``order`` (p, d, q) is estimated as it is (a backtest scores the order the whole
    series chose); when Hannan-Rissanen gives no stationary, invertible estimate at it, the
    AR and MA coefficients stay zero at that order (white-noise errors, differenced d times)."""
    from service.core.models.arima.search import choose_differencing

    b, *_ = np.linalg.lstsq(x, values, rcond=None)
    u = values - x @ b
    d = min(choose_differencing(u, 1).d, 1) if order is None else order[1]
    w = np.diff(u, n=d) if d else u
    w = w - w.mean()
    n = w.size
    white = ErrorModel(0, d, 0, (), (), float(w @ w) / n)
    if order is not None:
        p, _, q = order
        found = _arma(w, p, q) if p + q else None
        if found is None:
            return ErrorModel(p, d, q, (0.0,) * p, (0.0,) * q, white.sigma2)
        return ErrorModel(p, d, q, found[0], found[1], found[2])
    best: tuple[float, ErrorModel] = (aicc(float(w @ w), n, 0), white)
    for p in range(MAX_AR + 1):
        for q in range(MAX_MA + 1):
            if p + q == 0 or n < 10 * (p + q + 1):
                continue
            found = _arma(w, p, q)
            if found is None:
                continue
            value = aicc(found[2] * n, n, p + q)
            if value < best[0]:
                best = (value, ErrorModel(p, d, q, *found))
    return best[1]


def _arma(
    w: np.ndarray, p: int, q: int
) -> tuple[tuple[float, ...], tuple[float, ...], float] | None:
    """AR and MA coefficients and the variance by Hannan-Rissanen; None when the estimate is
    not stationary and invertible."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        try:
            est, _ = hannan_rissanen(w, ar_order=p, ma_order=q, demean=False)
        except (ValueError, np.linalg.LinAlgError):
            return None
    if not (est.is_stationary and est.is_invertible) or not est.sigma2 > 0:
        return None
    ar = tuple(float(v) for v in est.ar_params)
    ma = tuple(float(v) for v in est.ma_params)
    return ar, ma, float(est.sigma2)


def gls_coefficients(values: np.ndarray, x: np.ndarray, errors: ErrorModel) -> np.ndarray:
    """Regression coefficients by least squares on the ARMA-whitened (differenced) data."""
    yd, xd = values, x
    if errors.d:
        yd, xd = np.diff(values, n=errors.d), np.diff(x, n=errors.d, axis=0)
    ar_poly = np.r_[1.0, -np.asarray(errors.ar)]
    ma_poly = np.r_[1.0, np.asarray(errors.ma)]
    yw = signal.lfilter(ar_poly, ma_poly, yd)
    xw = signal.lfilter(ar_poly, ma_poly, xd, axis=0)
    if errors.d:
        # The constant differences away: it is absorbed by the integrated level.
        b, *_ = np.linalg.lstsq(xw[:, 1:], yw, rcond=None)
        return np.r_[0.0, b]
    b, *_ = np.linalg.lstsq(xw, yw, rcond=None)
    return np.asarray(b, dtype=float)
