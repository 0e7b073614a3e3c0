"""A fitted ETS model, held as its parameters; statsmodels' results are rebuilt lazily."""

from __future__ import annotations

import copy
from collections.abc import Sequence
from dataclasses import dataclass, field, replace
from typing import TYPE_CHECKING, Any

import numpy as np
import pandas as pd
from statsmodels.tools.eval_measures import aic, aicc, bic
from statsmodels.tsa.exponential_smoothing.ets import ETSResults

from service.core.checks import complete_values
from service.core.data.grid import index_after
from service.core.errors import FitError
from service.core.models.base import (
    Description,
    FitWarning,
    Forecast,
    as_dict,
    residuals_from,
)
from service.core.models.ets.lean import (
    LeanEtsModel,
    model_kwargs,
    n_parameters,
    point_forecast,
)
from service.core.models.intervals import Interval, normal_intervals
from service.core.models.labels import model_label
from service.core.models.library_warnings import captured
from service.core.models.simple import ljung_box_summary

if TYPE_CHECKING:
    from service.core.models.ets.family import EtsSettledSpec, EtsSpec

SIMULATION_PATHS = 5000
EVALUATION_PATHS = 1000
"""Paths simulated by re-filtered copies, which only backtests and calibration use: their
interval bounds feed coverage and conformal factors pooled over many errors, where the
quantile error of 1000 paths (about 1 % of the width at 95 %) is far below the sampling
noise of a few origins."""
SIMULATION_SEED = 20240601
ANALYTIC_CLASS = frozenset({"ANN", "AAN", "AAdN", "ANA", "AAA", "AAdA"})
"""The models whose forecast variances have a closed form (Hyndman et al. 2008, class 1)."""


def ets_label(spec: EtsSpec) -> str:
    """Textbook label, e.g. ETS(M,Ad,M)."""
    components = (
        spec.error or "add",
        spec.trend or "none",
        bool(spec.damped),
        spec.season or "none",
    )
    return model_label("ets", components=components)


def checked_values(y: pd.Series) -> np.ndarray:
    """The complete series ETS needs, at least 4 points."""
    return complete_values(y, "ets", 4)


@dataclass
class EtsFitted:
    """A fitted ETS model held as its parameters; the statsmodels results are rebuilt lazily."""

    specification: EtsSpec
    chosen: EtsSpec
    y: pd.Series
    seasonal_period: int
    smoothing: dict[str, float]
    initial: tuple[float, ...]
    initialization: str
    fit_seconds: float = 0.0
    warnings: list[FitWarning] = field(default_factory=list)
    simulation_paths: int = SIMULATION_PATHS
    estimates: tuple[float, ...] = ()
    """The exact fit's parameter vector in statsmodels' order (empty when heuristic)."""
    _cached: ETSResults | None = field(default=None, init=False, repr=False, compare=False)

    def __getstate__(self) -> dict[str, Any]:
        state = dict(self.__dict__)
        state["_cached"] = None
        return state

    def settled_specification(self) -> EtsSettledSpec | None:
        """The chosen model, its exact estimates as the start of a fit on another history;
        None when the initial states were not estimated."""
        return self.specification.settled_from(self.chosen, self.estimates)

    @property
    def label(self) -> str:
        """Textbook label of the chosen model."""
        return ets_label(self.chosen)

    @property
    def interval_method(self) -> str:
        """'analytic' for the class of models with closed-form variances, else 'simulated'."""
        return "analytic" if self.label[4:-1].replace(",", "") in ANALYTIC_CLASS else "simulated"

    def results(self) -> ETSResults:
        """The statsmodels results for this history, rebuilt from the parameters when needed."""
        if self._cached is None:
            kw = model_kwargs(self.chosen, self.seasonal_period)
            init: dict[str, Any] = {"initial_level": self.initial[0]}
            rest = self.initial[1:]
            if kw["trend"] is not None:
                init["initial_trend"] = rest[0]
                rest = rest[1:]
            if kw["seasonal"] is not None:
                init["initial_seasonal"] = np.asarray(rest, dtype=float)
            # Plain values: no dates to warn about, and results without pandas wrapping (a
            # smoothing's results cost ~6 x more wrapped in pandas objects).
            values = self.y.to_numpy(dtype=float)
            with captured(self.warnings, self.label):
                model = LeanEtsModel(values, initialization_method="known", **init, **kw)
                self._cached = model.smooth(np.asarray(list(self.smoothing.values()), float))
        return self._cached

    def forecast(self, horizon: int, coverage: Sequence[float]) -> Forecast:
        """Point forecasts and intervals (analytic or seeded simulation, see interval_method)."""
        return self._forecast_at(self.results(), len(self.y), horizon, coverage, self.y.index)

    def origin_forecasts(
        self, y: pd.Series, origins: Sequence[int], horizon: int, coverage: Sequence[float]
    ) -> list[Forecast]:
        """``refilter(y.iloc[:o]).forecast(horizon, coverage)`` for every origin ``o``, from
        one smoothing pass over the longest of these histories: the recursion only looks
        back, so its states at ``o - 1`` are those of a pass over ``y.iloc[:o]``, bit for bit,
        and so are the residuals that scale the intervals (tests compare with refilter)."""
        for origin in origins:
            checked_values(y.iloc[:origin])
        longest = self.refilter(y.iloc[: max(origins)])
        result = longest.results()
        return [
            longest._forecast_at(result, origin, horizon, coverage, y.index) for origin in origins
        ]

    def _forecast_at(
        self,
        result: ETSResults,
        origin: int,
        horizon: int,
        coverage: Sequence[float],
        dates: pd.DatetimeIndex,
    ) -> Forecast:
        """The forecast from the first ``origin`` points of ``result``'s history (all of it, or
        a prefix: what a smoothing of that prefix alone would give), dated after
        ``dates[:origin]``."""
        raw = getattr(result, "_results", result)
        resid = raw.resid[:origin]
        with captured(self.warnings, self.label):
            # What ETSResults.forecast runs on a history of ``origin`` points.
            point = point_forecast(raw, horizon, origin)
            if self.interval_method == "analytic":
                # What get_prediction(method="exact") computes beyond that history: the mean
                # squared residual times the class's relative variance at steps 1..h.
                steps = np.ones(horizon)
                steps[:] = range(1, horizon + 1)
                mse = np.sum(resid**2) / origin
                variance = mse * raw._relative_forecast_variance(steps)
                intervals = normal_intervals(point, np.sqrt(np.asarray(variance)), coverage)
            else:
                view = raw
                if origin != raw.nobs:
                    # The simulation's error scale is the prefix's mean squared residual.
                    view = copy.copy(raw)
                    view.scale = np.mean(resid**2)
                intervals = self._simulated(view, origin, horizon, coverage)
        if not np.all(np.isfinite(point)):
            raise FitError(f"{self.label} produced non-finite forecasts", field="model")
        return Forecast(index_after(dates, origin, horizon), point, intervals)

    def _simulated(
        self, result: ETSResults, origin: int, horizon: int, coverage: Sequence[float]
    ) -> tuple[Interval, ...]:
        paths = np.asarray(
            result.simulate(
                horizon,
                anchor=origin - 1,
                repetitions=self.simulation_paths,
                rng=np.random.default_rng(SIMULATION_SEED),
            ),
            dtype=float,
        ).reshape(horizon, self.simulation_paths)
        # Every level's bounds from one partition of the paths (the same order statistics and
        # interpolation as one quantile call per bound, bit for bit, at about half the cost).
        levels = [0.5 - c / 2 for c in coverage] + [0.5 + c / 2 for c in coverage]
        bounds = np.quantile(paths, levels, axis=1)
        k = len(coverage)
        return tuple(Interval(float(c), bounds[i], bounds[k + i]) for i, c in enumerate(coverage))

    def fitted_values(self) -> pd.Series:
        """One-step-ahead in-sample forecasts."""
        fitted = np.asarray(self.results().fittedvalues, dtype=float)
        return pd.Series(fitted, index=self.y.index, name="fitted")

    def residuals(self) -> pd.Series:
        """Observed minus one-step fitted, on the data scale (also for multiplicative error)."""
        return residuals_from(self.y, self.fitted_values())

    def refilter(self, y: pd.Series) -> EtsFitted:
        """The same smoothing parameters and initial states run through another history."""
        checked_values(y)
        return replace(self, y=y, fit_seconds=0.0, warnings=[], simulation_paths=EVALUATION_PATHS)

    def information_criteria(self) -> dict[str, float]:
        """AIC, AICc and BIC counting σ² and the initial states as estimated parameters."""
        llf = float(self.results().llf)
        n = len(self.y)
        k = n_parameters(self.chosen, self.seasonal_period)
        out = {"log_likelihood": llf, "aic": float(aic(llf, n, k)), "bic": float(bic(llf, n, k))}
        if n - k - 1 > 0:
            out["aicc"] = float(aicc(llf, n, k))
        return out

    def describe(self) -> Description:
        """Label, smoothing parameters, initial states, criteria and residual checks."""
        result = self.results()
        params = dict(self.smoothing)
        names = ["initial_level"]
        if self.chosen.trend not in (None, "none"):
            names.append("initial_trend")
        names += [f"initial_season_{i + 1}" for i in range(len(self.initial) - len(names))]
        params.update(zip(names, self.initial, strict=True))
        innovations = np.asarray(result.resid, dtype=float)
        diagnostics = replace(
            ljung_box_summary(innovations, self.seasonal_period, len(self.smoothing)),
            interval_method=self.interval_method,
            initial_states=self.initialization,
        )
        return Description(
            family="ets",
            label=self.label,
            specification=as_dict(self.chosen),
            parameters=params,
            information_criteria=self.information_criteria(),
            residual_variance=float(result.scale),
            residual_diagnostics=diagnostics,
            observations=len(self.y),
            fit_seconds=self.fit_seconds,
        )
