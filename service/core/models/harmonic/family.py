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
from dataclasses import dataclass
from typing import TYPE_CHECKING, ClassVar

import numpy as np
import pandas as pd

from service.core.checks import check_positive_int
from service.core.data.periods import check_periods, period_text
from service.core.errors import FitError
from service.core.models.base import parameter
from service.core.models.harmonic.terms import (
    MAX_AR,
    MAX_HARMONICS,
    MAX_MA,
    FourierTerms,
    choose_harmonics,
    max_harmonics,
)
from service.core.models.mstl import periods_parameter

# The implementation (statsmodels) loads in fit: the HTTP server imports this module for the
# catalogue and the specifications only (DEVELOPERS.md, after the layout).
if TYPE_CHECKING:
    from service.core.models.harmonic.fitted import HarmonicFitted


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
        f"error_order: [p, d, q] with p <= {MAX_AR}, d <= 1, q <= {MAX_MA}; null: by AICc.",
    )

    periods: tuple[float, ...] | None = periods_parameter()
    harmonics: tuple[int, ...] | None = parameter(
        None,
        "Sine-cosine pairs per period; null: chosen by AICc.",
        kind="integers",
        minimum=1,
        maximum=MAX_HARMONICS,
    )
    error_order: tuple[int, ...] | None = parameter(
        None,
        "[p, d, q] of the ARIMA errors; null: d by KPSS, p and q by AICc.",
        kind="integers",
        minimum=0,
        maximum=MAX_AR,
    )

    def fit(self, y: pd.Series, seasonal_period: int = 1) -> HarmonicFitted:
        """Choose the harmonics and the error model, then estimate the coefficients by GLS."""
        from service.core.models.harmonic.errors import choose_errors, gls_coefficients
        from service.core.models.harmonic.fitted import HarmonicFitted, check_series

        start = time.perf_counter()
        check_series(y)
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
        errors = choose_errors(values, x, self._error_order())
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

    def _error_order(self) -> tuple[int, int, int] | None:
        if self.error_order is None:
            return None
        order = tuple(self.error_order)
        limits = (MAX_AR, 1, MAX_MA)
        if len(order) != 3 or any(not 0 <= v <= top for v, top in zip(order, limits, strict=False)):
            raise FitError(
                f"error_order must be [p, d, q] with p <= {MAX_AR}, d <= 1 and q <= {MAX_MA}",
                field="model.error_order",
            )
        return int(order[0]), int(order[1]), int(order[2])

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
