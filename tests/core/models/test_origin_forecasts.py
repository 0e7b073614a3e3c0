"""Forecasts from several backtest origins in one pass equal those of re-filtering per origin,
and the ETS and ARIMA forecasts equal statsmodels' own on the same history."""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest
from statsmodels.tsa.exponential_smoothing.ets import ETSModel
from statsmodels.tsa.statespace.sarimax import SARIMAX

from service.core.models.arima.family import ArimaSpec
from service.core.models.base import Forecast, origin_forecasts
from service.core.models.combination import CombinationSpec
from service.core.models.ets.family import EtsSpec
from service.core.models.ets.lean import model_kwargs
from service.core.models.intervals import normal_quantile
from service.core.models.theta import ThetaSpec
from service.core.models.transforms import Transform, TransformedSpec

ORIGINS = [96, 104, 111, 120]
LEVELS = (0.8, 0.95)


def monthly(n: int = 132, seed: int = 11) -> pd.Series:
    rng = np.random.default_rng(seed)
    t = np.arange(n)
    values = 200 + 0.4 * t + 15 * np.sin(2 * np.pi * t / 12) + rng.normal(0, 3, n).cumsum()
    return pd.Series(values, index=pd.date_range("2012-01-01", periods=n, freq="MS"))


def arrays(fc: Forecast) -> list[np.ndarray]:
    return [fc.point] + [b for i in fc.intervals for b in (i.lower, i.upper)]


def per_origin(fitted: object, y: pd.Series, horizon: int) -> list[Forecast]:
    return [fitted.refilter(y.iloc[:o]).forecast(horizon, LEVELS) for o in ORIGINS]  # type: ignore[attr-defined]


def assert_same(one: list[Forecast], other: list[Forecast], tolerance: float = 0.0) -> None:
    assert len(one) == len(other)
    for a, b in zip(one, other, strict=True):
        assert a.index.equals(b.index)
        for u, v in zip(arrays(a), arrays(b), strict=True):
            if tolerance == 0.0:
                np.testing.assert_array_equal(u, v)
            else:
                np.testing.assert_allclose(u, v, rtol=tolerance, atol=tolerance)


ETS_MODELS = [
    EtsSpec("add", "none", False, "add"),
    EtsSpec("add", "add", True, "add"),
    EtsSpec("add", "add", False, "none"),
    EtsSpec("mul", "add", True, "mul"),
    EtsSpec("mul", "none", False, "add"),
]


@pytest.mark.parametrize(
    "spec", ETS_MODELS, ids=lambda s: f"{s.error}{s.trend}{s.damped}{s.season}"
)
def test_ets_origins_bit_identical_to_refiltering(spec: EtsSpec) -> None:
    y = monthly()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        fitted = spec.fit(y.iloc[:90], 12)
        assert_same(fitted.origin_forecasts(y, ORIGINS, 12, LEVELS), per_origin(fitted, y, 12))


@pytest.mark.parametrize("spec", ETS_MODELS[:2] + ETS_MODELS[3:4], ids=["ANA", "AAdA", "MAdM"])
def test_ets_forecast_equals_statsmodels(spec: EtsSpec) -> None:
    """The refiltered forecast is statsmodels' own on that history: the point path, the exact
    variance of the analytic class, the seeded simulation's quantiles otherwise."""
    y = monthly()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        fitted = spec.fit(y.iloc[:90], 12).refilter(y.iloc[:111])
        ours = fitted.forecast(12, LEVELS)
        init = {"initial_level": fitted.initial[0]}
        rest = list(fitted.initial[1:])
        if spec.trend != "none":
            init["initial_trend"] = rest.pop(0)
        init["initial_seasonal"] = np.asarray(rest)
        model = ETSModel(
            pd.Series(y.iloc[:111].to_numpy()),
            initialization_method="known",
            **init,
            **model_kwargs(spec, 12),
        )
        result = model.smooth(np.asarray(list(fitted.smoothing.values())))
        np.testing.assert_array_equal(ours.point, np.asarray(result.forecast(12)))
        if fitted.interval_method == "analytic":
            prediction = result.get_prediction(start=111, end=122, method="exact")
            sd = np.sqrt(np.asarray(prediction.forecast_variance, dtype=float))
            np.testing.assert_array_equal(
                ours.intervals[1].upper, ours.point + normal_quantile(0.95) * sd
            )
        else:
            paths = np.asarray(
                result.simulate(
                    12, anchor="end", repetitions=1000, rng=np.random.default_rng(20240601)
                )
            )
            lower = np.quantile(paths, 0.5 - 0.8 / 2, axis=1)
            np.testing.assert_array_equal(ours.intervals[0].lower, lower)


def test_transformed_and_combined_origins_bit_identical() -> None:
    y = monthly()
    log = Transform(kind="log", power=None, back_transform="mean")
    specs = [
        TransformedSpec(EtsSpec("add", "none", False, "add"), log),
        CombinationSpec(members=(EtsSpec("add", "add", True, "none"), ThetaSpec())),
        TransformedSpec(ArimaSpec(order=(0, 1, 1), seasonal_order=(0, 1, 1)), log),
    ]
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        for spec in specs[:2]:
            fitted = spec.fit(y.iloc[:90], 12)
            assert_same(origin_forecasts(fitted, y, ORIGINS, 12, LEVELS), per_origin(fitted, y, 12))
        fitted = specs[2].fit(y.iloc[:90], 12)
        assert_same(
            origin_forecasts(fitted, y, ORIGINS, 12, LEVELS), per_origin(fitted, y, 12), 1e-9
        )


@pytest.mark.parametrize(
    "spec",
    [
        ArimaSpec(order=(1, 1, 1), seasonal_order=(0, 1, 1)),
        ArimaSpec(order=(2, 0, 0), constant="mean"),
        ArimaSpec(order=(0, 1, 1), constant="drift"),
    ],
    ids=["seasonal", "mean", "drift"],
)
def test_arima_origins_equal_refiltering_and_statsmodels(spec: ArimaSpec) -> None:
    """One filter over the series forecasts every origin as a filter per origin does (to
    1e-9: the prediction step runs in numpy rather than in statsmodels' filter)."""
    y = monthly()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        fitted = spec.fit(y.iloc[:90], 12)
        batch = fitted.origin_forecasts(y, ORIGINS, 12, LEVELS)
        assert_same(batch, per_origin(fitted, y, 12), 1e-9)
        o = fitted.orders
        origin = ORIGINS[-1]
        t = np.arange(1, origin + 13, dtype=float)
        exog = None
        if o.constant:
            exog = (t if o.d + o.D else np.ones_like(t))[:, None]
        model = SARIMAX(
            y.iloc[:origin].to_numpy(),
            exog=None if exog is None else exog[:origin],
            order=(o.p, o.d, o.q),
            seasonal_order=(o.P, o.D, o.Q, o.m) if o.m > 1 else (0, 0, 0, 0),
            use_exact_diffuse=True,
        )
        params = np.r_[np.asarray(fitted.estimate.values), fitted.estimate.sigma2]
        prediction = model.filter(params, cov_type="none").get_forecast(
            12, exog=None if exog is None else exog[origin:]
        )
        np.testing.assert_allclose(batch[-1].point, prediction.predicted_mean, rtol=1e-9)
        sd = np.sqrt(np.asarray(prediction.var_pred_mean))
        np.testing.assert_allclose(
            batch[-1].intervals[0].upper - batch[-1].point, normal_quantile(0.8) * sd, rtol=1e-9
        )
