"""Dynamic harmonic regression: Fourier terms for each seasonal period with ARIMA errors.

Young, Pedregal & Tych (1999); Hyndman & Athanasopoulos, Forecasting: Principles and
Practice, 3rd ed., the section on dynamic harmonic regression. Periods need not be whole
numbers (365.25 days, 52.18 weeks a year): a sine and cosine pair per harmonic handles any.

Estimation is feasible GLS in cheap steps, so that thousands of hourly points fit in well
under a second (a joint likelihood search over 20-40 regression coefficients took minutes):
1. the harmonics per period by AICc of least squares on a constant and the Fourier terms
   (each period's count in turn, until none changes; from one Gram matrix);
2. the error model on the regression residuals: d by the KPSS sequence, then ARMA(p, q),
   p <= 3, q <= 2, by Hannan-Rissanen regressions and AICc (stationary, invertible only);
3. the coefficients again by GLS given that error model (series and terms pre-whitened by
   the ARMA filter).
Likelihood, fitted values and forecasts come from statsmodels' SARIMAX with those terms as
regressors at those parameters. Intervals are the ARIMA errors' forecast variance; the
regression coefficients are treated as known.
"""

from __future__ import annotations

import math
import time
import warnings
from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any, ClassVar

import numpy as np
import pandas as pd
from scipy import signal
from statsmodels.tsa.arima.estimators.hannan_rissanen import hannan_rissanen
from statsmodels.tsa.statespace.sarimax import SARIMAX

from service.core.checks import check_coverage, check_positive_int
from service.core.data.periods import check_periods, period_text
from service.core.errors import FitError, SeriesError
from service.core.models.base import (
    Description,
    FitWarning,
    Forecast,
    as_dict,
    future_index,
    parameter,
)
from service.core.models.intervals import normal_intervals
from service.core.models.labels import model_label
from service.core.models.mstl import periods_parameter
from service.core.models.simple import ljung_box_summary

MAX_HARMONICS = 12
"""Per period; FPP's examples stop near 10 for weekly and yearly cycles."""
MAX_AR = 3
MAX_MA = 2


@dataclass(frozen=True)
class HarmonicSpec:
    """Fourier terms for each period (harmonics by AICc) plus ARIMA errors."""

    family: ClassVar[str] = "harmonic_regression"
    summary: ClassVar[str] = (
        "Dynamic harmonic regression: sine and cosine terms for each seasonal period, the "
        "number of harmonics per period chosen by AICc, with ARIMA errors."
    )
    constraints: ClassVar[tuple[str, ...]] = (
        "periods may be non-integer (365.25, 52.18); null: the series' seasonal periods.",
        f"harmonics per period: 1 to min({MAX_HARMONICS}, (period - 1) / 2); null: by AICc.",
        "A harmonic that repeats a shorter period's frequency (the 7th of 168 is the 1st of "
        "24) is left out of the longer period.",
        "Intervals come from the ARIMA errors; the regression coefficients are treated as known.",
    )

    periods: tuple[float, ...] | None = periods_parameter()
    harmonics: tuple[int, ...] | None = parameter(
        None,
        "Sine-cosine pairs per period; null: chosen by AICc.",
        kind="integers",
        minimum=1,
        maximum=MAX_HARMONICS,
    )

    def fit(self, y: pd.Series, seasonal_period: int = 1) -> HarmonicFitted:
        """Choose the harmonics and the error model, then estimate the coefficients by GLS."""
        start = time.perf_counter()
        _check_series(y)
        periods = self._periods(seasonal_period)
        values = y.to_numpy(dtype=float)
        if not np.all(np.isfinite(values)):
            raise FitError("harmonic regression needs a series without gaps", field="series.values")
        for i, p in enumerate(periods):
            if values.size < 2 * p:
                raise FitError(
                    f"period {period_text(p)} needs two full cycles ({math.ceil(2 * p)} points), "
                    f"got {values.size}",
                    field=f"model.periods[{i}]",
                )
        t = np.arange(values.size, dtype=float)
        harmonics = self.harmonics or choose_harmonics(values, t, periods)
        terms = FourierTerms(periods, tuple(harmonics))
        x = terms.matrix(t)
        errors = choose_errors(values, x)
        beta = gls_coefficients(values, x, errors)
        fitted = HarmonicFitted(
            specification=self,
            y=y,
            terms=terms,
            errors=errors,
            coefficients=beta,
            fit_seconds=0.0,
        )
        fitted.fit_seconds = time.perf_counter() - start
        return fitted

    def _periods(self, seasonal_period: int) -> tuple[float, ...]:
        if self.harmonics is not None and self.periods is None:
            raise FitError("harmonics need periods beside them", field="model.harmonics")
        if self.periods is not None:
            periods = check_periods(self.periods, "model.periods")
        else:
            m = check_positive_int(seasonal_period, "series.seasonal_period")
            if m < 2:
                raise FitError(
                    "harmonic regression needs a seasonal period > 1",
                    field="series.seasonal_period",
                )
            periods = (float(m),)
        if self.harmonics is not None:
            if len(self.harmonics) != len(periods):
                raise FitError(
                    f"harmonics has {len(self.harmonics)} entries for {len(periods)} periods",
                    field="model.harmonics",
                )
            for i, (k, p) in enumerate(zip(self.harmonics, periods, strict=True)):
                if k > max_harmonics(p):
                    raise FitError(
                        f"period {period_text(p)} allows at most {max_harmonics(p)} harmonics",
                        field=f"model.harmonics[{i}]",
                    )
        return periods


def max_harmonics(period: float) -> int:
    """Pairs whose frequency stays below the Nyquist limit, at most MAX_HARMONICS."""
    return max(1, min(MAX_HARMONICS, math.ceil(period / 2) - 1))


@dataclass(frozen=True)
class FourierTerms:
    """The sine and cosine columns of the chosen harmonics (a constant first)."""

    periods: tuple[float, ...]
    harmonics: tuple[int, ...]

    def frequencies(self) -> list[tuple[str, float]]:
        """Column names and cycles per step, repeated frequencies left out."""
        seen: list[float] = []
        out: list[tuple[str, float]] = []
        for p, count in zip(self.periods, self.harmonics, strict=True):
            for k in range(1, count + 1):
                f = k / p
                if any(abs(f - s) < 1e-9 for s in seen) or f >= 0.5:
                    continue
                seen.append(f)
                out.append((f"{k}/{period_text(p)}", f))
        return out

    def names(self) -> list[str]:
        """Coefficient names: constant, then sin and cos per harmonic."""
        return ["constant"] + [
            f"{trig} {name}" for name, _ in self.frequencies() for trig in ("sin", "cos")
        ]

    def matrix(self, t: np.ndarray) -> np.ndarray:
        """The design at positions ``t`` (steps from the first fitted observation)."""
        cols = [np.ones_like(t)]
        for _, f in self.frequencies():
            angle = 2.0 * np.pi * f * t
            cols += [np.sin(angle), np.cos(angle)]
        return np.column_stack(cols)


def _aicc(rss: float, n: int, k: int) -> float:
    """AICc of a Gaussian regression with k coefficients plus the variance."""
    k += 1
    if rss <= 0 or n - k - 1 <= 0:
        return math.inf
    return n * math.log(rss / n) + 2 * k + 2 * k * (k + 1) / (n - k - 1)


def choose_harmonics(
    values: np.ndarray, t: np.ndarray, periods: tuple[float, ...]
) -> tuple[int, ...]:
    """Harmonics per period by AICc of least squares, one period at a time until stable."""
    full = FourierTerms(periods, tuple(max_harmonics(p) for p in periods))
    x = full.matrix(t)
    gram, cross, total = x.T @ x, x.T @ values, float(values @ values)
    columns = _columns_by_period(full)
    n = values.size

    def score(counts: tuple[int, ...]) -> float:
        keep = [0] + [c for i, k in enumerate(counts) for c in columns[i][: 2 * k]]
        g, c = gram[np.ix_(keep, keep)], cross[keep]
        try:
            b = np.linalg.solve(g, c)
        except np.linalg.LinAlgError:
            return math.inf
        return _aicc(max(total - float(b @ c), 1e-12 * total), n, len(keep))

    counts = tuple(1 for _ in periods)
    best = score(counts)
    for _ in range(4):
        changed = False
        for i, p in enumerate(periods):
            for k in range(1, max_harmonics(p) + 1):
                trial = (*counts[:i], k, *counts[i + 1 :])
                value = score(trial)
                if value < best - 1e-9:
                    counts, best, changed = trial, value, True
        if not changed:
            break
    return counts


def _columns_by_period(terms: FourierTerms) -> list[list[int]]:
    """The design's column numbers of each period's harmonics, in harmonic order."""
    out: list[list[int]] = []
    seen: list[float] = []
    column = 1
    for p, count in zip(terms.periods, terms.harmonics, strict=True):
        mine: list[int] = []
        for k in range(1, count + 1):
            f = k / p
            if any(abs(f - s) < 1e-9 for s in seen) or f >= 0.5:
                continue
            seen.append(f)
            mine += [column, column + 1]
            column += 2
        out.append(mine)
    return out


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


def choose_errors(values: np.ndarray, x: np.ndarray) -> ErrorModel:
    """d by the KPSS sequence on the OLS residuals, then ARMA(p, q) by Hannan-Rissanen and AICc."""
    from service.core.models.arima.search import choose_differencing

    b, *_ = np.linalg.lstsq(x, values, rcond=None)
    u = values - x @ b
    d = min(choose_differencing(u, 1).d, 1)
    w = np.diff(u, n=d) if d else u
    w = w - w.mean()
    n = w.size
    best: tuple[float, ErrorModel] = (
        _aicc(float(w @ w), n, 0),
        ErrorModel(0, d, 0, (), (), float(w @ w) / n),
    )
    for p in range(MAX_AR + 1):
        for q in range(MAX_MA + 1):
            if p + q == 0 or n < 10 * (p + q + 1):
                continue
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                try:
                    est, _ = hannan_rissanen(w, ar_order=p, ma_order=q, demean=False)
                except (ValueError, np.linalg.LinAlgError):
                    continue
            if not (est.is_stationary and est.is_invertible) or not est.sigma2 > 0:
                continue
            value = _aicc(float(est.sigma2) * n, n, p + q)
            if value < best[0]:
                ar = tuple(float(v) for v in est.ar_params)
                ma = tuple(float(v) for v in est.ma_params)
                best = (value, ErrorModel(p, d, q, ar, ma, float(est.sigma2)))
    return best[1]


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


@dataclass
class HarmonicFitted:
    """The chosen terms, the error model and the coefficients; SARIMAX is rebuilt on demand."""

    specification: HarmonicSpec
    y: pd.Series
    terms: FourierTerms
    errors: ErrorModel
    coefficients: np.ndarray
    fit_seconds: float = 0.0
    warnings: list[FitWarning] = field(default_factory=list)
    origin: pd.Timestamp | None = None
    _filtered: Any = field(default=None, repr=False, compare=False)

    def __post_init__(self) -> None:
        if self.origin is None:
            self.origin = self.y.index[0]

    def __getstate__(self) -> dict[str, Any]:
        state = dict(self.__dict__)
        state["_filtered"] = None
        return state

    def _positions(self, index: pd.DatetimeIndex) -> np.ndarray:
        assert self.origin is not None
        return steps_from(self.origin, index)

    def _design(self, index: pd.DatetimeIndex) -> np.ndarray:
        x = self.terms.matrix(self._positions(index))
        return x[:, 1:] if self.errors.d else x

    def _beta(self) -> np.ndarray:
        return self.coefficients[1:] if self.errors.d else self.coefficients

    def _results(self) -> Any:
        if self._filtered is None:
            e = self.errors
            with warnings.catch_warnings(record=True):
                warnings.simplefilter("always")
                model = SARIMAX(
                    self.y.to_numpy(dtype=float),
                    exog=self._design(self.y.index),
                    order=(e.p, e.d, e.q),
                    trend="n",
                    use_exact_diffuse=True,
                )
                params = np.r_[self._beta(), e.ar, e.ma, e.sigma2]
                self._filtered = model.filter(params, cov_type="none")
        return self._filtered

    def forecast(self, horizon: int, coverage: Sequence[float]) -> Forecast:
        """Fourier terms continued, ARIMA errors forecast; Gaussian intervals."""
        h = check_positive_int(horizon, "horizon")
        levels = check_coverage(coverage)
        index = future_index(self.y.index, h)
        with warnings.catch_warnings(record=True):
            warnings.simplefilter("always")
            prediction = self._results().get_forecast(h, exog=self._design(index))
            point = np.asarray(prediction.predicted_mean, dtype=float)
            sd = np.sqrt(np.asarray(prediction.var_pred_mean, dtype=float))
        if not (np.all(np.isfinite(point)) and np.all(np.isfinite(sd))):
            raise FitError("harmonic regression gave a non-finite forecast", field="model")
        return Forecast(index, point, normal_intervals(point, sd, levels))

    def fitted_values(self) -> pd.Series:
        """One-step predictions (NaN over the first d steps, absorbed by the diffuse start)."""
        values = np.asarray(self._results().fittedvalues, dtype=float).copy()
        values[: self.errors.d] = np.nan
        return pd.Series(values, index=self.y.index, name="fitted")

    def residuals(self) -> pd.Series:
        """Observed minus one-step predictions."""
        resid = self.y.to_numpy(dtype=float) - self.fitted_values().to_numpy()
        return pd.Series(resid, index=self.y.index, name="residuals")

    def refilter(self, y: pd.Series) -> HarmonicFitted:
        """The same terms and parameters on another history (positions kept from the origin)."""
        _check_series(y)
        return HarmonicFitted(
            self.specification, y, self.terms, self.errors, self.coefficients, 0.0, [], self.origin
        )

    def describe(self) -> Description:
        """Label with periods, harmonics and error orders; coefficients by name; AIC/AICc/BIC."""
        e = self.errors
        names = self.terms.names()
        parameters = {name: float(v) for name, v in zip(names, self.coefficients, strict=True)}
        parameters |= {f"ar{i + 1}": v for i, v in enumerate(e.ar)}
        parameters |= {f"ma{i + 1}": v for i, v in enumerate(e.ma)}
        n = int(np.isfinite(self.y.to_numpy(dtype=float)).sum())
        k = len(self._beta()) + e.p + e.q + 1
        loglik = float(self._results().llf)
        aic = -2 * loglik + 2 * k
        criteria = {"log_likelihood": loglik, "aic": aic, "bic": -2 * loglik + k * math.log(n)}
        if n - k - 1 > 0:
            criteria["aicc"] = aic + 2 * k * (k + 1) / (n - k - 1)
        resid = self.residuals().to_numpy()
        resid = resid[np.isfinite(resid)]
        return Description(
            family=HarmonicSpec.family,
            label=model_label(
                "harmonic_regression",
                period=self.terms.periods,
                harmonics=self.terms.harmonics,
                base=e.label,
            ),
            specification=as_dict(self.specification),
            parameters=parameters,
            information_criteria=criteria,
            residual_variance=e.sigma2,
            residual_diagnostics=ljung_box_summary(
                resid, round(min(self.terms.periods)), model_dof=e.p + e.q
            ),
            observations=n,
            fit_seconds=self.fit_seconds,
        )


def steps_from(origin: pd.Timestamp, index: pd.DatetimeIndex) -> np.ndarray:
    """Steps of the index's frequency from ``origin`` to each timestamp (negative before it)."""
    freq = index.freq
    if freq is None:
        raise SeriesError("the series index has no frequency", field="series")
    first, last = min(origin, index[0]), max(origin, index[-1])
    grid = pd.date_range(first, last, freq=freq)
    at = grid.get_indexer(index)
    zero = grid.get_indexer([origin])[0]
    if zero < 0 or np.any(at < 0):
        raise SeriesError("the history must continue the fitted series' timestamps", field="series")
    return (at - zero).astype(float)


def _check_series(y: object) -> None:
    if not isinstance(y, pd.Series) or not isinstance(y.index, pd.DatetimeIndex):
        raise SeriesError("expected a pandas Series on a DatetimeIndex", field="series")
    if y.index.freq is None:
        raise SeriesError("the series index has no frequency", field="series")
