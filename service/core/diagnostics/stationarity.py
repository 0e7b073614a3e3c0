"""Unit-root and stationarity tests (ADF, KPSS) and the verdict that combines them.

The ADF lag search is done here with one QR factorisation: the candidate regressions are
nested in the column order, so every lag's residual sum of squares falls out of the same
factors. That picks the same lag by AIC as ``statsmodels.tsa.stattools.adfuller`` (tested),
which refits OLS once per candidate lag (its cost on long series: tests/benchmarks/RESULTS.md).
KPSS is statsmodels' ``kpss`` at our bandwidth.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass
from typing import Any, Literal

import numpy as np

from service.core.applicability import NotApplicable

Regression = Literal["c", "ct"]
Bandwidth = Literal["short", "data"]
"""The KPSS long-run variance bandwidth: trunc(3 sqrt(n) / 13), or statsmodels' data-driven one."""

LEVEL = 0.05
"""Significance level of every test decision in the diagnostics."""

MIN_OBSERVATIONS = 10
"""Fewer points than this leave the unit-root regressions with almost no degrees of freedom."""

ADF_LAG_CAP = 24
"""Ceiling on the ADF lag search: Schwert's rule reaches 24 at about 1,600 points, and each
extra candidate lag widens every regression of a long series."""

ADF_LAG_RULE = (
    "Augmentation lags chosen by AIC from 0 up to ceil(12 (n/100)^(1/4)), at most "
    f"n/2 - terms - 1 and {ADF_LAG_CAP} (Schwert 1989)."
)
KPSS_LAG_RULE = (
    "Long-run variance by the Bartlett kernel with bandwidth trunc(3 √n / 13) (Newey & West 1987)."
)

VERDICT_RULE = (
    "The unit-root procedure's decision, its deterministic terms chosen in the sequence of "
    "Dolado, Jenkinson & Sosvilla-Rivero (1990): stationary, trend_stationary, "
    "difference_stationary, seasonal_difference_stationary for a seasonal random walk, or "
    "inconclusive below 20 points, with KPSS reported beside it as a check."
)


@dataclass(frozen=True)
class HypothesisTest:
    """One ADF or KPSS test: statistic, p-value (or a bound past the table) and critical values."""

    test: str
    regression: Regression
    statistic: float
    p_value: float | None
    p_value_bound: str | None
    critical_values: dict[str, float]
    observations: int
    lags_used: int
    lag_rule: str

    @property
    def rejects(self) -> bool:
        """Whether the null hypothesis is rejected at 5 % (a bound '< 0.01' rejects)."""
        if self.p_value is not None:
            return self.p_value < LEVEL
        return self.p_value_bound is not None and self.p_value_bound.startswith("<")


@dataclass(frozen=True)
class Stationarity:
    """ADF (constant; constant and trend), KPSS (level; trend) and the verdict of the unit-root
    procedure (``unit_root.decide``), whose steps are reported with it."""

    adf_constant: HypothesisTest | NotApplicable
    adf_trend: HypothesisTest | NotApplicable
    kpss_level: HypothesisTest | NotApplicable
    kpss_trend: HypothesisTest | NotApplicable
    verdict: str
    notes: tuple[str, ...]
    procedure: Any = None
    """The ``UnitRootDecision`` (or a NotApplicable saying why there is none)."""


def applicability(x: np.ndarray) -> NotApplicable | None:
    """Why the unit-root tests cannot run on x, or None when they can."""
    if x.size < MIN_OBSERVATIONS:
        return NotApplicable(
            f"{x.size} observations: the unit-root tests need at least {MIN_OBSERVATIONS}"
        )
    if not np.any(x != x[0]):
        return NotApplicable("the series is constant: unit-root tests are undefined")
    return None


def adf_max_lag(n: int, regression: Regression) -> int:
    """Schwert's ceil(12 (n/100)^(1/4)), bounded by n/2 - terms - 1 and by ADF_LAG_CAP."""
    schwert = math.ceil(12.0 * (n / 100.0) ** 0.25)
    return max(0, min(schwert, n // 2 - len(regression) - 1, ADF_LAG_CAP))


def adf_critical_values(regression: Regression, observations: float) -> dict[str, float]:
    """MacKinnon (2010) critical values at 1/5/10 % for T = the regression's observations.

    ``observations=math.inf`` gives the asymptotic values.
    """
    from statsmodels.tsa.adfvalues import mackinnoncrit

    values = mackinnoncrit(N=1, regression=regression, nobs=observations)
    return {"1%": float(values[0]), "5%": float(values[1]), "10%": float(values[2])}


def adf_test(
    x: np.ndarray, regression: Regression, max_lag: int | None = None
) -> HypothesisTest | NotApplicable:
    """Augmented Dickey-Fuller test, lag order by AIC over 0..max_lag as adfuller does."""
    from statsmodels.tsa.adfvalues import mackinnonp

    reason = applicability(x)
    if reason is not None:
        return reason
    limit = adf_max_lag(x.size, regression) if max_lag is None else max_lag
    dx = np.diff(x)
    try:
        best = _best_lag_by_aic(x, dx, regression, limit)
        statistic, observations = _adf_statistic(x, dx, regression, best)
    except np.linalg.LinAlgError:
        return NotApplicable("the ADF regressors are collinear for this series")
    if not math.isfinite(statistic):
        return NotApplicable("the ADF regression is singular for this series")
    return HypothesisTest(
        test="adf",
        regression=regression,
        statistic=statistic,
        p_value=float(mackinnonp(statistic, regression=regression, N=1)),
        p_value_bound=None,
        critical_values=adf_critical_values(regression, observations),
        observations=observations,
        lags_used=best,
        lag_rule=ADF_LAG_RULE,
    )


def _adf_design(
    x: np.ndarray, dx: np.ndarray, regression: Regression, lags: int
) -> tuple[np.ndarray, np.ndarray]:
    """Regressors [y_{t-1}, Δy_{t-1}, ..., Δy_{t-lags}] and the response Δy_t.

    The deterministic terms are not columns: they are regressed out of every column instead.
    """
    rows = dx.size - lags
    design = np.empty((rows, lags + 1))
    design[:, 0] = x[lags : lags + rows]
    for i in range(1, lags + 1):
        design[:, i] = dx[lags - i : lags - i + rows]
    return design, dx[lags:]


def _partial_out_terms(z: np.ndarray, regression: Regression) -> np.ndarray:
    """Columns of z with the constant (and linear trend) regressed out (Frisch-Waugh-Lovell)."""
    out = z - z.mean(axis=0)
    if regression == "ct":
        t = np.arange(z.shape[0], dtype=float)
        t -= t.mean()
        out -= np.outer(t, (t @ out) / (t @ t))
    return out


def _scaled_cholesky(
    design: np.ndarray, response: np.ndarray, regression: Regression
) -> np.ndarray:
    """Lower Cholesky factor of the unit-diagonal Gram matrix of [design, response], terms out.

    Its last row plays the part of Q'y in a QR factorisation: squared entries past column j
    add up to the residual sum of squares of the regression on the first j columns (the
    response scaled to unit norm). Raises LinAlgError when the regressors are collinear.
    """
    z = _partial_out_terms(np.column_stack([design, response]), regression)
    gram = z.T @ z
    scale = np.sqrt(np.diag(gram))
    if np.any(scale == 0.0):
        raise np.linalg.LinAlgError("a regressor is constant after removing the terms")
    return np.asarray(np.linalg.cholesky(gram / np.outer(scale, scale)))


def _best_lag_by_aic(x: np.ndarray, dx: np.ndarray, regression: Regression, limit: int) -> int:
    """The lag whose regression on the common sample has the lowest AIC (ties: fewer lags)."""
    if limit == 0:
        return 0
    design, response = _adf_design(x, dx, regression, limit)
    factor = _scaled_cholesky(design, response, regression)
    last = factor[-1]
    tail = np.cumsum((last[:-1] ** 2)[::-1])[::-1]
    tail = np.concatenate([tail, [0.0]]) + last[-1] ** 2
    rows = response.size
    total = float(np.sum((response - response.mean()) ** 2))
    if regression == "ct":
        total = float(np.sum(_partial_out_terms(response[:, None], regression) ** 2))
    terms = len(regression)
    best_aic, best_lag = math.inf, 0
    for lag in range(limit + 1):
        width = terms + 1 + lag
        ssr = total * float(tail[lag + 1])
        if ssr <= 0.0:
            return lag
        aic = rows * (math.log(2 * math.pi * ssr / rows) + 1.0) + 2.0 * width
        if aic < best_aic:
            best_aic, best_lag = aic, lag
    return best_lag


def _adf_statistic(
    x: np.ndarray, dx: np.ndarray, regression: Regression, lags: int
) -> tuple[float, int]:
    """The t-ratio of y_{t-1} in the ADF regression with ``lags`` lags, and its row count."""
    from scipy.linalg import solve_triangular

    design, response = _adf_design(x, dx, regression, lags)
    rows, columns = design.shape
    width = columns + len(regression)
    if rows <= width:
        return math.nan, rows
    factor = _scaled_cholesky(design, response, regression)
    inner = factor[:columns, :columns]
    projected = factor[-1, :columns]
    coefficients = solve_triangular(inner.T, projected, lower=False)
    unit = solve_triangular(inner, np.eye(columns)[:, 0], lower=True)
    scale = float(factor[-1, -1] ** 2) / (rows - width)
    standard_error = math.sqrt(scale * float(unit @ unit))
    if standard_error == 0.0:
        return math.nan, rows
    return float(coefficients[0]) / standard_error, rows


def kpss_lags(n: int) -> int:
    """The KPSS bandwidth trunc(3 sqrt(n) / 13)."""
    return int(3.0 * math.sqrt(n) / 13.0)


def kpss_test(
    x: np.ndarray, regression: Regression, bandwidth: Bandwidth = "short"
) -> HypothesisTest | NotApplicable:
    """KPSS (1992) test of level or trend stationarity by statsmodels' ``kpss``, at the short
    bandwidth trunc(3 sqrt(n) / 13) or (``"data"``) statsmodels' data-driven one (Hobijn,
    Franses & Ooms 1998).

    Past the ends of the published table statsmodels clips the p-value and warns; the p-value
    is then reported as a bound (tests/reference/README.md, trap 7) and the warning dropped.
    """
    from statsmodels.tools.sm_exceptions import InterpolationWarning
    from statsmodels.tsa.stattools import kpss

    reason = applicability(x)
    if reason is not None:
        return reason
    n = x.size
    lags: int | str = min(kpss_lags(n), n - 1) if bandwidth == "short" else "auto"
    with warnings.catch_warnings(), np.errstate(divide="ignore", invalid="ignore"):
        warnings.simplefilter("ignore", InterpolationWarning)
        result = kpss(x, regression, nlags=lags, result_object=True)
    statistic = float(result.statistic)
    if not math.isfinite(statistic) or statistic < 0.0:
        return NotApplicable("the long-run variance estimate is not positive")
    table = tuple(float(result.critical_values[k]) for k in _KPSS_LEVELS)
    p_value: float | None = float(result.pvalue)
    bound = None
    if statistic >= table[-1]:
        p_value, bound = None, "< 0.01"
    elif statistic <= table[0]:
        p_value, bound = None, "> 0.10"
    return HypothesisTest(
        test="kpss",
        regression=regression,
        statistic=statistic,
        p_value=p_value,
        p_value_bound=bound,
        critical_values=dict(zip(_KPSS_LEVELS, table, strict=True)),
        observations=n,
        lags_used=int(result.lags),
        lag_rule=KPSS_LAG_RULE,
    )


_KPSS_LEVELS = ("10%", "5%", "2.5%", "1%")
"""statsmodels' critical values of Kwiatkowski, Phillips, Schmidt & Shin (1992), Table 1."""
