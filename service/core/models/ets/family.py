"""Exponential smoothing in the ETS taxonomy (Hyndman et al. 2008) on statsmodels' ETSModel.

Fields left out are chosen by AICc. The search is cheap first (heuristic initial states,
a handful of smoothing parameters per candidate), then the winner is fitted exactly with
estimated initial states started from the search solution: the same idea as DESIGN's
"search cheaply, then fit exactly", and it also avoids the poor local optima the default
starting values of ETSModel sometimes reach on seasonal data.
"""

from __future__ import annotations

import math
import time
from collections.abc import Sequence
from dataclasses import dataclass, field, replace
from typing import Any, ClassVar

import numpy as np
import pandas as pd
from statsmodels.tools.eval_measures import aic, aicc, bic
from statsmodels.tsa.exponential_smoothing.ets import ETSModel, ETSResults, ETSResultsWrapper

from service.core.errors import FitError, SpecificationError
from service.core.models.base import (
    Description,
    FitWarning,
    Forecast,
    as_dict,
    future_index,
    parameter,
    residuals_from,
)
from service.core.models.intervals import Interval, normal_intervals
from service.core.models.library_warnings import captured
from service.core.models.simple import ljung_box_summary

MAX_SEASONAL_PERIOD = 24
SIMULATION_PATHS = 5000
EVALUATION_PATHS = 1000
"""Paths simulated by re-filtered copies, which only backtests and calibration use: their
interval bounds feed coverage and conformal factors pooled over many errors, where the
quantile error of 1000 paths (about 1 % of the width at 95 %) is far below the sampling
noise of a few origins."""
SIMULATION_SEED = 20240601
_SEARCH_MAXITER = 300
_EXACT_MAXITER = 1000
_EXACT_CLASS = frozenset({"ANN", "AAN", "AAdN", "ANA", "AAA", "AAdA"})


class _LeanResults(ETSResults):  # type: ignore[misc]
    """statsmodels' ETS results without the parameter covariance, which nothing here reads.

    ETSResults computes it eagerly: a complex-step Hessian of the likelihood (k(k+1)/2 + k
    evaluations; 7 ms for the 15 parameters of a monthly seasonal model) for every fit and
    for every re-filtered origin, about 10 % of an ETS search. The estimates, the forecasts
    and both kinds of intervals do not depend on it; standard errors would be NaN.
    """

    @property
    def cov_params_approx(self) -> np.ndarray:
        """Not computed: NaN of the right shape."""
        k = len(self.params)
        return np.full((k, k), np.nan)


class _EtsModel(ETSModel):  # type: ignore[misc]
    """ETSModel with lean results and a cheaper likelihood evaluation for the optimiser.

    ``_loglike_internal`` is statsmodels' own with the generic wrappers taken out of the hot
    path (``np.mean`` and ``np.sum`` become the ``np.add.reduce`` they call, the square the
    product it computes): the same floating-point operations in the same order, so the
    optimiser visits the same points and the fits are bit-identical, at about 0.6 x the cost
    per evaluation. Complex parameters (complex-step derivatives) take the original path.
    """

    @property
    def _res_classes(self) -> dict[str, tuple[type[Any], type[Any]]]:
        return {"fit": (_LeanResults, ETSResultsWrapper)}

    def _loglike_internal(
        self,
        params: np.ndarray,
        fitted_path: np.ndarray,
        state_path: np.ndarray,
        is_fixed: np.ndarray | None = None,
        fixed_values: np.ndarray | None = None,
        use_beta_star: bool = False,
        use_gamma_star: bool = False,
    ) -> float:
        if is_fixed is None or params.dtype.kind == "c":
            return float(
                super()._loglike_internal(
                    params,
                    fitted_path,
                    state_path,
                    is_fixed,
                    fixed_values,
                    use_beta_star,
                    use_gamma_star,
                )
            )
        data = self.endog
        self._smoothing_func(
            params,
            data,
            fitted_path,
            state_path,
            np.ascontiguousarray(is_fixed, dtype=np.int64),
            fixed_values,
            use_beta_star,
            use_gamma_star,
        )
        res = (data - fitted_path) / fitted_path if self.error == "mul" else data - fitted_path
        logL = -self.nobs / 2 * (np.log(2 * np.pi * (np.add.reduce(res * res) / res.size)) + 1)
        if self.error == "mul":
            fitted_path[fitted_path == 0] = 1e-32
            logL -= np.add.reduce(np.log(np.abs(fitted_path)))
        return logL


@dataclass(frozen=True)
class EtsSpec:
    """An ETS model; any component left null is chosen by AICc over the admissible models."""

    family: ClassVar[str] = "ets"
    summary: ClassVar[str] = (
        "Exponential smoothing state space model (error, trend, season), chosen by AICc "
        "when components are left out."
    )
    constraints: ClassVar[tuple[str, ...]] = (
        "Multiplicative error, trend or season need strictly positive data.",
        "A seasonal component needs a seasonal period between 2 and 24 and two full seasons.",
        "damped needs a trend; it is ignored when trend is none.",
        "The automatic search leaves out multiplicative trend and additive error with "
        "multiplicative season (numerically unstable); ask for them explicitly.",
        "Intervals are analytic for additive-error models without multiplicative components, "
        "simulated (seeded, 5000 paths) otherwise.",
    )

    error: str | None = parameter(
        None, "Error type; null to choose by AICc.", kind="choice", allowed=("add", "mul")
    )
    trend: str | None = parameter(
        None,
        "Trend type; null to choose by AICc.",
        kind="choice",
        allowed=("none", "add", "mul"),
    )
    damped: bool | None = parameter(None, "Damp the trend; null to choose by AICc.", kind="boolean")
    season: str | None = parameter(
        None,
        "Season type; null to choose by AICc.",
        kind="choice",
        allowed=("none", "add", "mul"),
    )

    def __post_init__(self) -> None:
        for name, allowed in (
            ("error", ("add", "mul")),
            ("trend", ("none", "add", "mul")),
            ("season", ("none", "add", "mul")),
        ):
            value = getattr(self, name)
            if value is not None and value not in allowed:
                raise SpecificationError(
                    f"{name} must be one of {', '.join(allowed)}; got {value!r}",
                    field=f"model.{name}",
                )

    def fit(self, y: pd.Series, seasonal_period: int = 1) -> EtsFitted:
        """Fit this model (searching the components left out) and return the fitted winner."""
        return search_ets(y, seasonal_period, self).best

    def is_complete(self) -> bool:
        """True when every component is given, so no search is needed."""
        return None not in (self.error, self.trend, self.season) and (
            self.trend == "none" or self.damped is not None
        )


@dataclass(frozen=True)
class EtsCandidate:
    """One model tried by the search: its label, AICc (None when it failed) and why it failed."""

    label: str
    specification: EtsSpec
    aicc: float | None
    failure: str | None = None


@dataclass(frozen=True)
class EtsSearch:
    """The exactly fitted winner and the ranking of every candidate tried."""

    best: EtsFitted
    candidates: tuple[EtsCandidate, ...]


def ets_label(spec: EtsSpec) -> str:
    """Textbook label, e.g. ETS(M,Ad,M)."""
    error = {"add": "A", "mul": "M"}[spec.error or "add"]
    trend = {"none": "N", "add": "A", "mul": "M"}[spec.trend or "none"]
    if trend != "N" and spec.damped:
        trend += "d"
    season = {"none": "N", "add": "A", "mul": "M"}[spec.season or "none"]
    return f"ETS({error},{trend},{season})"


def candidates_for(spec: EtsSpec, y: np.ndarray, seasonal_period: int) -> list[EtsSpec]:
    """The complete specifications the search tries for ``spec`` on this data."""
    positive = bool(np.all(y > 0))
    seasonal_ok = 2 <= seasonal_period <= MAX_SEASONAL_PERIOD and y.size >= 2 * seasonal_period
    _check_explicit(spec, positive, seasonal_ok, seasonal_period)
    errors = [spec.error] if spec.error else (["add", "mul"] if positive else ["add"])
    if spec.season:
        seasons = [spec.season]
    elif seasonal_ok:
        seasons = ["none", "add", "mul"] if positive else ["none", "add"]
    else:
        seasons = ["none"]
    trends = [spec.trend] if spec.trend else (["add"] if spec.damped else ["none", "add"])
    out: list[EtsSpec] = []
    for error in errors:
        for season in seasons:
            unstable = error == "add" and season == "mul"
            if unstable and not (spec.error and spec.season):
                continue
            for trend in trends:
                for damped in [False] if trend == "none" else _dampings(spec.damped):
                    out.append(EtsSpec(error, trend, damped, season))
    return out


def _dampings(damped: bool | None) -> list[bool]:
    return [damped] if damped is not None else [False, True]


def _check_explicit(spec: EtsSpec, positive: bool, seasonal_ok: bool, period: int) -> None:
    for name in ("error", "trend", "season"):
        if getattr(spec, name) == "mul" and not positive:
            raise FitError(
                f"a multiplicative {name} needs strictly positive data", field=f"model.{name}"
            )
    if spec.season in ("add", "mul") and not seasonal_ok:
        raise FitError(
            f"a seasonal ETS needs a seasonal period between 2 and {MAX_SEASONAL_PERIOD} and "
            f"two full seasons of data (period {period})",
            field="model.season",
        )


@dataclass(frozen=True)
class EtsRefitSpec:
    """The AICc search of ``base`` again, on a longer history, with an earlier exact fit as the
    start of the winner's exact fit when the same model wins.

    Not a family of its own: the selection refits an ETS candidate on the full series with it.
    The exact fit (initial states estimated) is most of an ETS search's cost; started from the
    estimates on the data before the first backtest origin it converges in a few iterations
    (co2, 444 monthly points: 0.16 s against 0.71 s, the same model and likelihood to 1e-2).
    Narrowing the search to the models within 10 AICc of the earlier best was tried too and
    dropped: on short series (airmiles, lh) it kept out the model the full data chose."""

    family: ClassVar[str] = "ets"

    base: EtsSpec
    warm_model: EtsSpec
    warm_start: tuple[float, ...]
    """The earlier exact estimates of ``warm_model``, in statsmodels' parameter order."""

    def fit(self, y: pd.Series, seasonal_period: int = 1) -> EtsFitted:
        """The full search, its winner's exact fit warm-started when it is ``warm_model``."""
        warm = (self.warm_model, self.warm_start)
        return search_ets(y, seasonal_period, self.base, warm=warm).best

    def json_form(self) -> dict[str, Any]:
        """The search it repeats, as a request would write it."""
        return as_dict(self.base)


def search_ets(
    y: pd.Series,
    seasonal_period: int = 1,
    spec: EtsSpec | None = None,
    warm: tuple[EtsSpec, tuple[float, ...]] | None = None,
) -> EtsSearch:
    """Rank the admissible ETS models for ``y`` by AICc and fit the winner exactly; ``warm``
    gives a model's earlier exact estimates as the exact fit's start when that model wins."""
    spec = spec or EtsSpec()
    start = time.perf_counter()
    values = _checked_values(y)
    if spec.is_complete():
        direct = _direct_fit(spec, y, values, seasonal_period)
        if direct is not None:
            direct.fit_seconds = time.perf_counter() - start
            score = direct.information_criteria().get("aicc")
            return EtsSearch(direct, (EtsCandidate(ets_label(spec), spec, score),))
    notes: list[FitWarning] = []
    tried: list[EtsCandidate] = []
    scored: list[tuple[float, EtsSpec, _Estimate]] = []
    for candidate in candidates_for(spec, values, seasonal_period):
        label = ets_label(candidate)
        estimate = _search_fit(candidate, values, seasonal_period)
        problem = estimate.failure or _implausible(estimate, values, seasonal_period)
        if problem is not None:
            tried.append(EtsCandidate(label, candidate, None, problem))
            notes.append(FitWarning("failed_candidate", f"{label} left out: {problem}"))
            continue
        tried.append(EtsCandidate(label, candidate, estimate.aicc))
        scored.append((estimate.aicc, candidate, estimate))
    if not scored:
        reasons = "; ".join(f"{c.label}: {c.failure}" for c in tried)
        raise FitError(f"no ETS model could be fitted to this series ({reasons})", field="model")
    scored.sort(key=lambda item: item[0])
    _, chosen, rough = scored[0]
    earlier = warm[1] if warm is not None and warm[0] == chosen else None
    fitted = _exact_fit(spec, chosen, y, values, seasonal_period, rough, earlier)
    fitted.warnings[:0] = notes if not spec.is_complete() else []
    fitted.fit_seconds = time.perf_counter() - start
    ranking = sorted(tried, key=lambda c: (c.aicc is None, c.aicc or 0.0))
    return EtsSearch(fitted, tuple(ranking))


def _direct_fit(spec: EtsSpec, y: pd.Series, values: np.ndarray, period: int) -> EtsFitted | None:
    """A fully specified model: one exact fit from statsmodels' own start, as a direct call
    would make; None (so the two-stage path runs) when it fails, does not converge or
    forecasts implausibly. On 20 seeded seasonal series the two-stage path found the same
    likelihood to 1e-3, at 1.1-1.3 x the cost."""
    caught: list[FitWarning] = []
    label = ets_label(spec)
    try:
        with captured(caught, label):
            model = _EtsModel(pd.Series(values), **_model_kwargs(spec, period))
            result = model.fit(disp=False, maxiter=_EXACT_MAXITER)
            check = np.asarray(result.forecast(max(2 * period, 12)), dtype=float)
    except (ValueError, np.linalg.LinAlgError, OverflowError, ZeroDivisionError):
        return None
    converged = (result.mle_retvals or {}).get("converged", True)
    estimate = _Estimate(
        _smoothing_of(result),
        _initial_of(result),
        float(result.llf),
        float(aicc(float(result.llf), values.size, n_parameters(spec, period))),
        "estimated",
        tuple(caught),
        forecast_check=check,
    )
    if not converged or not math.isfinite(estimate.llf) or _implausible(estimate, values, period):
        return None
    fitted = EtsFitted(
        specification=spec,
        chosen=spec,
        y=y,
        seasonal_period=period,
        smoothing=dict(estimate.smoothing),
        initial=estimate.initial,
        initialization="estimated",
        warnings=list(caught),
    )
    fitted._cached = result
    return fitted


def _checked_values(y: pd.Series) -> np.ndarray:
    values = y.to_numpy(dtype=float)
    if not np.all(np.isfinite(values)):
        raise FitError(
            "ets needs a complete series (use missing=interpolate)", field="series.values"
        )
    if values.size < 4:
        raise FitError(
            f"ets needs at least 4 observations, got {values.size}", field="series.values"
        )
    return values


@dataclass(frozen=True)
class _Estimate:
    """A candidate's smoothing parameters, initial states, log-likelihood and AICc."""

    smoothing: dict[str, float]
    initial: tuple[float, ...]
    llf: float
    aicc: float
    initialization: str
    warnings: tuple[FitWarning, ...] = ()
    failure: str | None = None
    forecast_check: np.ndarray | None = None


def _model_kwargs(spec: EtsSpec, period: int) -> dict[str, Any]:
    seasonal = spec.season if spec.season != "none" else None
    return {
        "error": spec.error,
        "trend": spec.trend if spec.trend != "none" else None,
        "damped_trend": bool(spec.damped) and spec.trend not in (None, "none"),
        "seasonal": seasonal,
        "seasonal_periods": period if seasonal else None,
    }


def n_parameters(spec: EtsSpec, period: int) -> int:
    """Estimated quantities counted in the information criteria (σ² and initial states too)."""
    kw = _model_kwargs(spec, period)
    smoothing = 1 + (kw["trend"] is not None) + (kw["seasonal"] is not None) + kw["damped_trend"]
    states = 1 + (kw["trend"] is not None) + (period if kw["seasonal"] else 0)
    return smoothing + states + 1


def _search_fit(spec: EtsSpec, values: np.ndarray, period: int) -> _Estimate:
    """A cheap fit with heuristic initial states (estimated ones when the data are too short)."""
    k = n_parameters(spec, period)
    if values.size - k - 1 <= 0:
        return _failed(f"too few observations ({values.size}) for {k} parameters")
    method = "heuristic" if values.size >= max(10, 2 * period) else "estimated"
    caught: list[FitWarning] = []
    try:
        with captured(caught, ets_label(spec)):
            model = _EtsModel(values, initialization_method=method, **_model_kwargs(spec, period))
            result = model.fit(disp=False, maxiter=_SEARCH_MAXITER)
            check = np.asarray(result.forecast(max(2 * period, 12)), dtype=float)
    except (ValueError, np.linalg.LinAlgError, OverflowError, ZeroDivisionError) as exc:
        return _failed(f"the optimiser failed ({exc})")
    retvals = result.mle_retvals or {}
    llf = float(result.llf)
    if not retvals.get("converged", True):
        return _failed("the optimisation did not converge")
    if not math.isfinite(llf):
        return _failed("the likelihood is not finite")
    return _Estimate(
        _smoothing_of(result),
        _initial_of(result),
        llf,
        float(aicc(llf, values.size, k)),
        method,
        tuple(caught),
        forecast_check=check,
    )


def _failed(reason: str) -> _Estimate:
    return _Estimate({}, (), math.nan, math.nan, "none", failure=reason)


def _implausible(estimate: _Estimate, values: np.ndarray, period: int) -> str | None:
    """A forecast that is non-finite or leaves a wide band around the history (trap 8)."""
    check = estimate.forecast_check
    if check is None:
        return None
    if not np.all(np.isfinite(check)):
        return "its forecast is not finite"
    spread = float(values.max() - values.min()) or abs(float(values.mean())) or 1.0
    if check.min() < values.min() - 3 * spread or check.max() > values.max() + 3 * spread:
        return "its forecast explodes beyond any plausible range of the history"
    return None


def _smoothing_of(result: ETSResults) -> dict[str, float]:
    out = {"alpha": float(result.smoothing_level)}
    if result.model.has_trend:
        out["beta"] = float(result.smoothing_trend)
    if result.model.has_seasonal:
        out["gamma"] = float(result.smoothing_seasonal)
    if result.model.damped_trend:
        out["phi"] = float(result.damping_trend)
    return out


def _initial_of(result: ETSResults) -> tuple[float, ...]:
    """Initial level, trend and season in the order ETSModel's 'known' initialisation takes."""
    out = [float(result.initial_level)]
    if result.model.has_trend:
        out.append(float(result.initial_trend))
    if result.model.has_seasonal:
        out.extend(float(v) for v in np.asarray(result.initial_seasonal, dtype=float))
    return tuple(out)


def _exact_fit(
    requested: EtsSpec,
    chosen: EtsSpec,
    y: pd.Series,
    values: np.ndarray,
    period: int,
    rough: _Estimate,
    warm: tuple[float, ...] | None = None,
) -> EtsFitted:
    """Re-estimate the winner with estimated initial states, started from the search solution
    (or from ``warm``, earlier exact estimates of the same model on a shorter history)."""
    notes = list(rough.warnings)
    estimate = rough
    kept: ETSResults | None = None
    if rough.initialization == "heuristic":
        caught: list[FitWarning] = []
        try:
            with captured(caught, ets_label(chosen)):
                # A RangeIndex series, as in results(): statsmodels' prediction needs an index.
                model = _EtsModel(pd.Series(values), **_model_kwargs(chosen, period))
                start = np.asarray(model.start_params, dtype=float).copy()
                if warm is not None and len(warm) == start.size:
                    start = np.asarray(warm, dtype=float)
                else:
                    start[: len(rough.smoothing)] = list(rough.smoothing.values())
                result = model.fit(start_params=start, disp=False, maxiter=_EXACT_MAXITER)
            exact = _Estimate(
                _smoothing_of(result),
                _initial_of(result),
                float(result.llf),
                float(aicc(float(result.llf), values.size, n_parameters(chosen, period))),
                "estimated",
                tuple(caught),
            )
            converged = (result.mle_retvals or {}).get("converged", True)
            if converged and math.isfinite(exact.llf) and exact.llf >= rough.llf:
                estimate = exact
                notes = list(caught)
                kept = result
            else:
                notes.append(
                    FitWarning(
                        "kept_heuristic_start",
                        f"{ets_label(chosen)}: estimating the initial states did not improve "
                        "the likelihood; heuristic initial states kept",
                    )
                )
        except (ValueError, np.linalg.LinAlgError, OverflowError, ZeroDivisionError) as exc:
            notes.append(
                FitWarning("kept_heuristic_start", f"{ets_label(chosen)}: exact fit failed ({exc})")
            )
    fitted = EtsFitted(
        specification=requested,
        chosen=chosen,
        y=y,
        seasonal_period=period,
        smoothing=dict(estimate.smoothing),
        initial=estimate.initial,
        initialization=estimate.initialization,
        warnings=notes,
        estimates=tuple(float(v) for v in kept.params) if kept is not None else (),
    )
    # The exact fit's own results serve this history: no re-smoothing for the first forecast.
    fitted._cached = kept
    return fitted


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

    def refit_specification(self) -> EtsRefitSpec | None:
        """The same search for a longer history, warm-started from this exact fit; None when
        nothing was searched or the initial states were not estimated."""
        if self.specification.is_complete() or not self.estimates:
            return None
        return EtsRefitSpec(self.specification, self.chosen, self.estimates)

    @property
    def label(self) -> str:
        """Textbook label of the chosen model."""
        return ets_label(self.chosen)

    @property
    def interval_method(self) -> str:
        """'analytic' for the class of models with closed-form variances, else 'simulated'."""
        return "analytic" if self.label[4:-1].replace(",", "") in _EXACT_CLASS else "simulated"

    def results(self) -> ETSResults:
        """The statsmodels results for this history, rebuilt from the parameters when needed."""
        if self._cached is None:
            kw = _model_kwargs(self.chosen, self.seasonal_period)
            init: dict[str, Any] = {"initial_level": self.initial[0]}
            rest = self.initial[1:]
            if kw["trend"] is not None:
                init["initial_trend"] = rest[0]
                rest = rest[1:]
            if kw["seasonal"] is not None:
                init["initial_seasonal"] = np.asarray(rest, dtype=float)
            # A RangeIndex keeps statsmodels' prediction machinery working without date warnings.
            values = pd.Series(self.y.to_numpy(dtype=float))
            with captured(self.warnings, self.label):
                model = _EtsModel(values, initialization_method="known", **init, **kw)
                self._cached = model.smooth(np.asarray(list(self.smoothing.values()), float))
        return self._cached

    def forecast(self, horizon: int, coverage: Sequence[float]) -> Forecast:
        """Point forecasts and intervals (analytic or seeded simulation, see interval_method)."""
        result = self.results()
        n = len(self.y)
        with captured(self.warnings, self.label):
            point = np.asarray(result.forecast(horizon), dtype=float)
            if self.interval_method == "analytic":
                prediction = result.get_prediction(start=n, end=n + horizon - 1, method="exact")
                sd = np.sqrt(np.asarray(prediction.forecast_variance, dtype=float))
                intervals = normal_intervals(point, sd, coverage)
            else:
                intervals = self._simulated(result, horizon, coverage)
        if not np.all(np.isfinite(point)):
            raise FitError(f"{self.label} produced non-finite forecasts", field="model")
        return Forecast(future_index(self.y.index, horizon), point, intervals)

    def _simulated(
        self, result: ETSResults, horizon: int, coverage: Sequence[float]
    ) -> tuple[Interval, ...]:
        paths = np.asarray(
            result.simulate(
                horizon,
                anchor="end",
                repetitions=self.simulation_paths,
                rng=np.random.default_rng(SIMULATION_SEED),
            ),
            dtype=float,
        ).reshape(horizon, self.simulation_paths)
        out = []
        for c in coverage:
            lower = np.quantile(paths, 0.5 - c / 2, axis=1)
            upper = np.quantile(paths, 0.5 + c / 2, axis=1)
            out.append(Interval(float(c), lower, upper))
        return tuple(out)

    def fitted_values(self) -> pd.Series:
        """One-step-ahead in-sample forecasts."""
        fitted = np.asarray(self.results().fittedvalues, dtype=float)
        return pd.Series(fitted, index=self.y.index, name="fitted")

    def residuals(self) -> pd.Series:
        """Observed minus one-step fitted, on the data scale (also for multiplicative error)."""
        return residuals_from(self.y, self.fitted_values())

    def refilter(self, y: pd.Series) -> EtsFitted:
        """The same smoothing parameters and initial states run through another history."""
        _checked_values(y)
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
        diagnostics = ljung_box_summary(innovations, self.seasonal_period, len(self.smoothing))
        diagnostics["interval_method"] = self.interval_method
        diagnostics["initial_states"] = self.initialization
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
