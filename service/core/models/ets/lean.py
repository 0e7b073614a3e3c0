"""The statsmodels speed-up for ETS: a lean ETSModel, and how a specification maps onto it.

The subclass overrides private statsmodels internals (``_res_classes``,
``_loglike_internal``), which is why pyproject.toml pins statsmodels below its next minor
version; tests/core/models/ets/test_ets_model.py checks that its fits stay bit-identical to
statsmodels' own (unless ``by_least_squares`` is set: squares.py).
"""

from __future__ import annotations

from collections import OrderedDict
from typing import TYPE_CHECKING, Any

import numpy as np
from statsmodels.tsa.exponential_smoothing.ets import ETSModel, ETSResults, ETSResultsWrapper

from service.core.models.ets.squares import LeastSquaresFit

if TYPE_CHECKING:
    from service.core.models.ets.family import EtsSpec


class _LeanResults(ETSResults):  # type: ignore[misc]
    """statsmodels' ETS results without the parameter covariance, which nothing here reads.

    ETSResults computes it eagerly, a complex-step Hessian of the likelihood (k(k+1)/2 + k
    evaluations) for every fit and every re-filtered origin (its share of an ETS search is
    in tests/benchmarks/RESULTS.md). The estimates, the forecasts and both kinds of intervals
    do not depend on it; standard errors would be NaN.
    """

    @property
    def cov_params_approx(self) -> np.ndarray:
        """Not computed: NaN of the right shape."""
        k = len(self.params)
        return np.full((k, k), np.nan)


class LeanEtsModel(ETSModel, LeastSquaresFit):  # type: ignore[misc]
    """ETSModel with lean results and a cheaper likelihood evaluation for the optimiser.

    ``_loglike_internal`` is statsmodels' own with the generic wrappers taken out of the hot
    path (``np.mean`` and ``np.sum`` become the ``np.add.reduce`` they call, the square the
    product it computes): the same floating-point operations in the same order, so the
    optimiser visits the same points and the fits are bit-identical, at about 0.6 x the cost
    per evaluation. Complex parameters (complex-step derivatives) take the original path.

    ``starting_states`` (level, trend, season) stand in for the heuristic initial states that
    the "estimated" initialisation computes as its start (a seasonal decomposition, ~1 ms):
    the search has them from its cheap fits, and a fit given a complete start never reads them.
    """

    def __init__(
        self,
        endog: Any,
        *args: Any,
        starting_states: tuple[Any, Any, Any] | None = None,
        **kwargs: Any,
    ) -> None:
        self._starting_states = starting_states
        super().__init__(endog, *args, **kwargs)

    def set_initialization_method(
        self,
        initialization_method: str,
        initial_level: Any = None,
        initial_trend: Any = None,
        initial_seasonal: Any = None,
    ) -> None:
        given = self._starting_states
        if initialization_method != "estimated" or given is None:
            super().set_initialization_method(
                initialization_method, initial_level, initial_trend, initial_seasonal
            )
            return
        # statsmodels' own method with the given states as "known" ones, then the parameter
        # indexes of the estimated initialisation, as its method ends.
        super().set_initialization_method("known", *given)
        self.initialization_method = "estimated"
        self._internal_params_index = OrderedDict(
            zip(self._internal_param_names, np.arange(self._k_params_internal), strict=True)
        )
        self._params_index = OrderedDict(
            zip(self.param_names, np.arange(self.k_params), strict=True)
        )

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


def model_kwargs(spec: EtsSpec, period: int) -> dict[str, Any]:
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
    kw = model_kwargs(spec, period)
    smoothing = 1 + (kw["trend"] is not None) + (kw["seasonal"] is not None) + kw["damped_trend"]
    states = 1 + (kw["trend"] is not None) + (period if kw["seasonal"] else 0)
    return smoothing + states + 1


def point_forecast(result: ETSResults, horizon: int, origin: int | None = None) -> np.ndarray:
    """The forecast from the states after the first ``origin`` points of ``result``'s history
    (default: all of it): what ``simulate(horizon, anchor=origin - 1, random_errors=zeros)``
    returns, which is also ``forecast``. With zero errors the states follow running products
    (the damped trend) and sums (the level) and the season repeats; numpy's accumulations run
    the same operations in the same order as statsmodels' step loop, so the values are the
    same bit for bit (tests/core/models/ets/test_ets_model.py) at a fraction of the cost. A
    multiplicative trend takes statsmodels' loop."""
    raw = getattr(result, "_results", result)
    start = raw.nobs if origin is None else origin
    if raw.model.trend == "mul":
        anchor = "end" if start == raw.nobs else start - 1
        zeros = np.zeros((horizon, 1))
        return np.asarray(raw.simulate(horizon, anchor=anchor, random_errors=zeros), dtype=float)
    # Internal layout: alpha, beta, gamma, phi, level, trend, seasons (s[-m] last).
    state = np.asarray(raw._get_prediction_params(start), dtype=float)
    steps = np.full(horizon + 1, state[3])
    steps[0] = state[5]
    path = np.empty(horizon + 1)
    path[0] = state[4]
    path[1:] = np.multiply.accumulate(steps)[1:]
    level = np.add.accumulate(path)[1:]
    seasons = state[6:][::-1]
    season = seasons[np.arange(horizon) % seasons.size]
    out: np.ndarray = level * season if raw.model.seasonal == "mul" else level + season
    return out
