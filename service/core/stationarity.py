"""Unit-root and stationarity tests (ADF, KPSS) and the verdict that combines them.

The ADF lag search is done here with one QR factorisation: the candidate regressions are
nested in the column order, so every lag's residual sum of squares falls out of the same
factors. That picks the same lag by AIC as ``statsmodels.tsa.stattools.adfuller`` (tested) at
a fraction of its cost, which refits OLS once per candidate lag (40 s at 100,000 points).
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass
from typing import Any, Literal

import numpy as np
from statsmodels.tools.sm_exceptions import InterpolationWarning
from statsmodels.tsa.adfvalues import mackinnoncrit, mackinnonp
from statsmodels.tsa.stattools import kpss

from service.core.applicability import NotApplicable, plain_float

Regression = Literal["c", "ct"]

LEVEL = 0.05
"""Significance level of every test decision in the diagnostics."""

MIN_OBSERVATIONS = 10
"""Fewer points than this leave the unit-root regressions with almost no degrees of freedom."""

ADF_LAG_CAP = 24
"""Ceiling on the ADF lag search: Schwert's rule reaches 24 at about 1,600 points, and each
extra candidate lag widens every regression of a long series."""

ADF_LAG_RULE = (
    "lag order chosen by AIC over 0..max_lag with max_lag = ceil(12 (n/100)^(1/4)) "
    f"(Schwert 1989), at most n/2 - terms - 1 and at most {ADF_LAG_CAP}"
)
KPSS_LAG_RULE = (
    "Newey-West bandwidth trunc(3 sqrt(n) / 13), the short bandwidth Hyndman's unit-root "
    "differencing search uses (from memory); in seeded simulations it found d = 1 for random "
    "walks of 200 points 37 times in 40, the data-driven bandwidth 28 times"
)

VERDICT_RULE = (
    "at 5 %: stationary if ADF (constant) rejects a unit root and KPSS (level) does not reject "
    "stationarity; otherwise trend_stationary if ADF (constant and trend) rejects and KPSS "
    "(trend) does not reject; otherwise difference_stationary if neither ADF rejects and KPSS "
    "(level) rejects; otherwise inconclusive"
)

_NAMES = {"c": "constant", "ct": "constant_and_trend"}


@dataclass(frozen=True)
class TestResult:
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

    def to_dict(self) -> dict[str, Any]:
        """The wire form."""
        null = "unit root" if self.test == "adf" else "stationary"
        return {
            "applicable": True,
            "test": self.test,
            "deterministic_terms": _NAMES[self.regression],
            "null_hypothesis": null,
            "statistic": plain_float(self.statistic),
            "p_value": plain_float(self.p_value),
            "p_value_bound": self.p_value_bound,
            "critical_values": {k: plain_float(v) for k, v in self.critical_values.items()},
            "observations": self.observations,
            "lags_used": self.lags_used,
            "lag_rule": self.lag_rule,
            "rejects_null_at_5_percent": self.rejects,
        }


@dataclass(frozen=True)
class Stationarity:
    """ADF (constant; constant and trend), KPSS (level; trend) and the combined verdict."""

    adf_constant: TestResult | NotApplicable
    adf_trend: TestResult | NotApplicable
    kpss_level: TestResult | NotApplicable
    kpss_trend: TestResult | NotApplicable
    verdict: str
    notes: tuple[str, ...]

    def to_dict(self) -> dict[str, Any]:
        """The wire form, with the decision rule spelt out."""
        return {
            "adf_constant": self.adf_constant.to_dict(),
            "adf_constant_and_trend": self.adf_trend.to_dict(),
            "kpss_level": self.kpss_level.to_dict(),
            "kpss_trend": self.kpss_trend.to_dict(),
            "verdict": self.verdict,
            "decision_rule": VERDICT_RULE,
            "notes": list(self.notes),
        }


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


def adf_critical_values(regression: Regression, observations: int) -> dict[str, float]:
    """MacKinnon (2010) critical values at 1/5/10 % for T = the regression's observations."""
    values = mackinnoncrit(N=1, regression=regression, nobs=observations)
    return {"1%": float(values[0]), "5%": float(values[1]), "10%": float(values[2])}


def adf_test(
    x: np.ndarray, regression: Regression, max_lag: int | None = None
) -> TestResult | NotApplicable:
    """Augmented Dickey-Fuller test, lag order by AIC over 0..max_lag as adfuller does."""
    reason = applicability(x)
    if reason is not None:
        return reason
    limit = adf_max_lag(x.size, regression) if max_lag is None else max_lag
    dx = np.diff(x)
    best = _best_lag_by_aic(x, dx, regression, limit)
    statistic, observations = _adf_statistic(x, dx, regression, best)
    if not math.isfinite(statistic):
        return NotApplicable("the ADF regression is singular for this series")
    return TestResult(
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
    x: np.ndarray, dx: np.ndarray, regression: Regression, lags: int, trend_first: bool
) -> tuple[np.ndarray, np.ndarray]:
    """Design [terms, y_{t-1}, Δy_{t-1..t-lags}] (or terms last) and the response Δy_t."""
    rows = dx.size - lags
    columns = [x[lags : lags + rows]]
    columns += [dx[lags - i : lags - i + rows] for i in range(1, lags + 1)]
    terms = [np.ones(rows)]
    if regression == "ct":
        terms.append(np.arange(1.0, rows + 1.0))
    ordered = terms + columns if trend_first else columns + terms
    return np.column_stack(ordered), dx[lags:]


def _augmented_r(design: np.ndarray, response: np.ndarray) -> np.ndarray:
    """R of the QR factorisation of [design, response]: its last column holds Q'y and |e|.

    Design columns are scaled to unit norm first (a level of 1e9 beside a constant of 1 is
    otherwise near-singular); residual sums of squares and t-ratios do not change with it.
    """
    norms = np.sqrt(np.einsum("ij,ij->j", design, design))
    norms[norms == 0.0] = 1.0
    return np.asarray(np.linalg.qr(np.column_stack([design / norms, response]), mode="r"))


def _best_lag_by_aic(x: np.ndarray, dx: np.ndarray, regression: Regression, limit: int) -> int:
    """The lag whose regression on the common sample has the lowest AIC (ties: fewer lags)."""
    if limit == 0:
        return 0
    design, response = _adf_design(x, dx, regression, limit, trend_first=True)
    r = _augmented_r(design, response)
    width_full = design.shape[1]
    projected = r[:width_full, -1]
    floor = float(r[-1, -1] ** 2)
    tail = np.concatenate([np.cumsum((projected**2)[::-1])[::-1], [0.0]])
    rows = response.size
    terms = len(regression) + 1
    best_aic, best_lag = math.inf, 0
    for lag in range(limit + 1):
        width = terms + lag
        ssr = floor + float(tail[width])
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
    design, response = _adf_design(x, dx, regression, lags, trend_first=False)
    rows, width = design.shape
    r = _augmented_r(design, response)
    factor = r[:width, :width]
    diagonal = np.abs(np.diag(factor))
    if rows <= width or diagonal.min() <= 1e-10 * diagonal.max():
        return math.nan, rows
    coefficients = np.linalg.solve(factor, r[:width, -1])
    scale = float(r[-1, -1] ** 2) / (rows - width)
    inverse = np.linalg.solve(factor, np.eye(width))
    standard_error = math.sqrt(scale * float(inverse[0] @ inverse[0]))
    if standard_error == 0.0:
        return math.nan, rows
    return float(coefficients[0]) / standard_error, rows


def kpss_lags(n: int) -> int:
    """The KPSS bandwidth trunc(3 sqrt(n) / 13)."""
    return int(3.0 * math.sqrt(n) / 13.0)


def kpss_test(x: np.ndarray, regression: Regression) -> TestResult | NotApplicable:
    """KPSS (1992) test of level or trend stationarity; p-values past the table are bounds."""
    reason = applicability(x)
    if reason is not None:
        return reason
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        try:
            lags = kpss_lags(x.size)
            result = kpss(x, regression=regression, nlags=lags, result_object=True)
        except (ValueError, ZeroDivisionError, np.linalg.LinAlgError) as exc:
            return NotApplicable(f"KPSS could not be computed: {exc}")
    clipped = any(issubclass(w.category, InterpolationWarning) for w in caught)
    p_value: float | None = float(result.pvalue)
    bound = None
    if clipped:
        bound = "< 0.01" if result.pvalue <= 0.01 else "> 0.10"
        p_value = None
    return TestResult(
        test="kpss",
        regression=regression,
        statistic=float(result.statistic),
        p_value=p_value,
        p_value_bound=bound,
        critical_values={k: float(v) for k, v in result.critical_values.items()},
        observations=int(x.size),
        lags_used=int(result.lags),
        lag_rule=KPSS_LAG_RULE,
    )


def stationarity(x: np.ndarray, notes: tuple[str, ...] = ()) -> Stationarity:
    """All four tests on a finite series and the verdict of VERDICT_RULE."""
    adf_c, adf_ct = adf_test(x, "c"), adf_test(x, "ct")
    kpss_c, kpss_ct = kpss_test(x, "c"), kpss_test(x, "ct")
    return Stationarity(
        adf_c, adf_ct, kpss_c, kpss_ct, verdict(adf_c, adf_ct, kpss_c, kpss_ct), notes
    )


def verdict(
    adf_c: TestResult | NotApplicable,
    adf_ct: TestResult | NotApplicable,
    kpss_c: TestResult | NotApplicable,
    kpss_ct: TestResult | NotApplicable,
) -> str:
    """stationary, trend_stationary, difference_stationary, inconclusive or not_applicable."""
    tests = (adf_c, adf_ct, kpss_c, kpss_ct)
    if not all(isinstance(t, TestResult) for t in tests):
        return "not_applicable"
    assert isinstance(adf_c, TestResult) and isinstance(adf_ct, TestResult)
    assert isinstance(kpss_c, TestResult) and isinstance(kpss_ct, TestResult)
    if adf_c.rejects and not kpss_c.rejects:
        return "stationary"
    if adf_ct.rejects and not kpss_ct.rejects:
        return "trend_stationary"
    if not adf_c.rejects and not adf_ct.rejects and kpss_c.rejects:
        return "difference_stationary"
    return "inconclusive"
