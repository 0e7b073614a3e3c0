"""The lean ETSModel subclass: bit-identical likelihoods and fits, no covariance computed."""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest
from statsmodels.tsa.exponential_smoothing.ets import ETSModel

from service.core.models.ets.lean import LeanEtsModel

SHAPES = [
    {"error": "add", "trend": "add", "damped_trend": True, "seasonal": "add"},
    {"error": "mul", "trend": None, "damped_trend": False, "seasonal": "mul"},
    {"error": "mul", "trend": "add", "damped_trend": False, "seasonal": None},
]


def positive_seasonal(n: int = 84, seed: int = 5) -> pd.Series:
    rng = np.random.default_rng(seed)
    t = np.arange(n)
    values = 80 + 0.3 * t + 6 * np.sin(2 * np.pi * t / 12) + rng.normal(0, 1.5, n)
    return pd.Series(values)


def kwargs_for(shape: dict[str, object]) -> dict[str, object]:
    return {**shape, "seasonal_periods": 12 if shape["seasonal"] else None}


@pytest.mark.parametrize("shape", SHAPES)
def test_fits_are_bit_identical_to_statsmodels(shape: dict[str, object]) -> None:
    y = positive_seasonal()
    with warnings.catch_warnings(), np.errstate(all="ignore"):
        warnings.simplefilter("ignore")
        for method in ("heuristic", "estimated"):
            ours = LeanEtsModel(y, initialization_method=method, **kwargs_for(shape))
            theirs = ETSModel(y, initialization_method=method, **kwargs_for(shape))
            a = ours.fit(disp=False, maxiter=300)
            b = theirs.fit(disp=False, maxiter=300)
            assert np.array_equal(np.asarray(a.params), np.asarray(b.params))
            assert a.llf == b.llf
            assert np.array_equal(np.asarray(a.forecast(24)), np.asarray(b.forecast(24)))


def test_the_covariance_is_not_computed() -> None:
    y = positive_seasonal()
    with warnings.catch_warnings(), np.errstate(all="ignore"):
        warnings.simplefilter("ignore")
        result = LeanEtsModel(y, **kwargs_for(SHAPES[0])).fit(disp=False, maxiter=50)
    k = len(result.params)
    assert result.cov_params_default.shape == (k, k)
    assert np.isnan(result.cov_params_default).all()


@pytest.mark.parametrize("shape", SHAPES)
def test_squared_residuals_give_statsmodels_likelihood(shape: dict[str, object]) -> None:
    """The least-squares residuals carry the whole likelihood: -n/2 (log(2 pi SSE / n) + 1)
    is statsmodels' log-likelihood at any parameters, multiplicative errors included."""
    from service.core.models.ets.squares import likelihood_residuals

    y = positive_seasonal()
    model = LeanEtsModel(y, **kwargs_for(shape))
    rng = np.random.default_rng(3)
    for _ in range(3):
        params = np.asarray(model.start_params, dtype=float)
        params[: 1 + bool(shape["trend"]) + bool(shape["seasonal"])] = rng.uniform(0.05, 0.3)
        smoothed = model.smooth(params)
        fitted = np.asarray(smoothed.fittedvalues, dtype=float)
        r = likelihood_residuals(y.to_numpy(dtype=float), fitted, shape["error"] == "mul")
        n = y.size
        assert -n / 2 * (np.log(2 * np.pi * np.sum(r * r) / n) + 1) == pytest.approx(
            smoothed.llf, rel=1e-12
        )


def test_least_squares_reaches_the_optimum_in_fewer_evaluations() -> None:
    """A seasonal series in the hundreds: the exact fit (initial states estimated) by least
    squares ends at the L-BFGS-B fit's likelihood or higher, with a fraction of its
    likelihood evaluations."""
    rng = np.random.default_rng(42)
    t = np.arange(200)
    y = pd.Series(300 + 0.6 * t + 25 * np.sin(2 * np.pi * t / 12) + rng.normal(0, 5, 200).cumsum())
    results = {}
    with warnings.catch_warnings(), np.errstate(all="ignore"):
        warnings.simplefilter("ignore")
        for squares in (False, True):
            for error in ("add", "mul"):
                model = LeanEtsModel(y, error=error, seasonal="add", seasonal_periods=12)
                model.by_least_squares = squares
                results[squares, error] = model.fit(disp=False, maxiter=1000)
    for error in ("add", "mul"):
        ours, theirs = results[True, error], results[False, error]
        assert ours.mle_retvals["converged"] and theirs.mle_retvals["converged"]
        assert ours.llf >= theirs.llf - 1e-6
        assert ours.mle_retvals["fcalls"] < 0.3 * theirs.mle_retvals["fcalls"]


def test_finalists_exact_fits_use_least_squares_and_explicit_fits_do_not(monkeypatch) -> None:  # type: ignore[no-untyped-def]
    """The search's exact fits run by least squares; a fully specified model's direct fit
    stays statsmodels' own (tests/core/models/ets/test_ets.py compares it)."""
    from service.core.models.ets import gradient, squares
    from service.core.models.ets.family import EtsSpec

    seen: list[str] = []
    by_gradient, by_squares = gradient.minimise, squares.least_squares_fit

    def spy_gradient(*args, **kwargs):  # type: ignore[no-untyped-def]
        seen.append("gradient")
        return by_gradient(*args, **kwargs)

    def spy_squares(*args, **kwargs):  # type: ignore[no-untyped-def]
        seen.append("squares")
        return by_squares(*args, **kwargs)

    monkeypatch.setattr(gradient, "minimise", spy_gradient)
    monkeypatch.setattr(squares, "least_squares_fit", spy_squares)
    y = positive_seasonal()
    y.index = pd.date_range("2015-01-01", periods=len(y), freq="MS")
    with warnings.catch_warnings(), np.errstate(all="ignore"):
        warnings.simplefilter("ignore")
        EtsSpec("add", "none", False, "add").fit(y, 12)
        assert seen == ["gradient"]
        seen.clear()
        EtsSpec(error="add", season="add").fit(y, 12)
    assert "squares" in seen


def test_shared_heuristic_starts_give_bit_identical_search_fits() -> None:
    """The search computes the heuristic initial states once per trend and season type and
    gives them as known states: every candidate's cheap fit is the one statsmodels' heuristic
    initialisation makes."""
    from service.core.models.ets import search
    from service.core.models.ets.family import EtsSpec

    for values, period in (
        (positive_seasonal().to_numpy(), 12),
        (positive_seasonal(60, 8).to_numpy(), 4),
    ):
        starts: dict = {}  # type: ignore[type-arg]
        for candidate in EtsSpec().candidates(values, period):
            with warnings.catch_warnings(), np.errstate(all="ignore"):
                warnings.simplefilter("ignore")
                alone = search._search_fit(candidate, values, period)
                shared = search._search_fit(candidate, values, period, starts)
            assert alone.failure == shared.failure
            assert alone.llf == shared.llf or (np.isnan(alone.llf) and np.isnan(shared.llf))
            assert alone.smoothing == shared.smoothing and alone.initial == shared.initial
        assert 0 < len(starts) < len(EtsSpec().candidates(values, period))


def test_point_forecasts_equal_statsmodels_zero_error_simulation() -> None:
    """point_forecast gives ETSResults.simulate's values with zero errors, bit for bit, for
    every error, trend, damping and season and from several origins."""
    from service.core.models.ets.lean import point_forecast

    y = positive_seasonal(90, 1)
    shapes = [
        (error, trend, damped, season)
        for error in ("add", "mul")
        for trend, damped in ((None, False), ("add", False), ("add", True), ("mul", True))
        for season in (None, "add", "mul")
    ]
    with warnings.catch_warnings(), np.errstate(all="ignore"):
        warnings.simplefilter("ignore")
        for error, trend, damped, season in shapes:
            model = LeanEtsModel(
                y,
                error=error,
                trend=trend,
                damped_trend=damped,
                seasonal=season,
                seasonal_periods=12 if season else None,
            )
            result = model.fit(disp=False, maxiter=100)
            zeros = np.zeros((25, 1))
            assert np.array_equal(point_forecast(result, 25), np.asarray(result.forecast(25)))
            for origin in (1, 13, 60, 90):
                expected = result.simulate(25, anchor=origin - 1, random_errors=zeros)
                assert np.array_equal(point_forecast(result, 25, origin), np.asarray(expected))


@pytest.mark.parametrize("shape", SHAPES)
def test_given_starting_states_make_the_estimated_model(shape: dict[str, object]) -> None:
    """A model given the heuristic initial states has the estimated initialisation's
    parameters and start, and fits bit for bit as one that computes them; placeholder states
    change nothing when the fit's start is complete."""
    from statsmodels.tsa.exponential_smoothing.initialization import _initialization_heuristic

    y = positive_seasonal().to_numpy()
    kw = kwargs_for(shape)
    period = 12 if shape["seasonal"] else 1
    heuristic = _initialization_heuristic(
        y, trend=shape["trend"], seasonal=shape["seasonal"], seasonal_periods=period
    )
    placeholder = (0.0, 0.0, np.zeros(12) if shape["seasonal"] else None)
    with warnings.catch_warnings(), np.errstate(all="ignore"):
        warnings.simplefilter("ignore")
        own = LeanEtsModel(y, **kw)
        given = LeanEtsModel(y, starting_states=heuristic, **kw)
        assert given.param_names == own.param_names
        assert np.array_equal(given.start_params, own.start_params)
        a, b = own.fit(disp=False, maxiter=200), given.fit(disp=False, maxiter=200)
        assert np.array_equal(np.asarray(a.params), np.asarray(b.params)) and a.llf == b.llf
        start = np.asarray(a.params, dtype=float)
        fits = []
        for states in (None, placeholder):
            model = LeanEtsModel(y, starting_states=states, **kw)
            model.by_least_squares = True
            fits.append(model.fit(start_params=start, disp=False, maxiter=200))
    assert np.array_equal(np.asarray(fits[0].params), np.asarray(fits[1].params))
