"""ArimaSpec: fixed orders against direct statsmodels fits, labels, regressors, errors, pickles."""

from __future__ import annotations

import pickle

import numpy as np
import pandas as pd
import pytest
from numpy.testing import assert_allclose
from statsmodels.tsa.statespace.sarimax import SARIMAX

from service.core.errors import FitError, RequestError, SpecificationError
from service.core.models import registry
from service.core.models.arima.family import ArimaSpec


def monthly(n: int = 96, seed: int = 5) -> pd.Series:
    rng = np.random.default_rng(seed)
    t = np.arange(n)
    values = 50 + 0.4 * t + 6 * np.sin(2 * np.pi * t / 12) + np.cumsum(rng.normal(0, 1, n))
    return pd.Series(values, index=pd.date_range("2015-01-01", periods=n, freq="MS"))


def test_fixed_seasonal_order_matches_sarimax_on_the_differenced_series() -> None:
    y = monthly()
    fitted = ArimaSpec(order=(1, 1, 0), seasonal_order=(0, 1, 1)).fit(y, 12)
    w = np.diff(y.to_numpy())[12:] - np.diff(y.to_numpy())[:-12]
    direct = SARIMAX(w, order=(1, 0, 0), seasonal_order=(0, 0, 1, 12)).fit(disp=False)
    # The seasonal MA sits at the unit-root boundary (-0.999), where the likelihood is flat:
    # the two optimisers agree to 1e-5 in log-likelihood, a little less in the coefficients.
    assert_allclose(fitted.estimate.loglik, direct.llf, atol=1e-4)
    assert_allclose(fitted.estimate.values, direct.params[:2], atol=2e-3)
    assert_allclose(fitted.estimate.sigma2, direct.params[2], rtol=2e-3)
    assert fitted.describe().label == "ARIMA(1,1,0)x(0,1,1)12"


def test_forecast_matches_the_undifferenced_model_filtered_at_the_estimates() -> None:
    y = monthly()
    fitted = ArimaSpec(order=(0, 1, 1), seasonal_order=(0, 1, 1)).fit(y, 12)
    forecast = fitted.forecast(6, [0.95])
    model = SARIMAX(
        y.to_numpy(), order=(0, 1, 1), seasonal_order=(0, 1, 1, 12), use_exact_diffuse=True
    )
    direct = model.filter(np.r_[fitted.estimate.values, fitted.estimate.sigma2])
    expected = direct.get_forecast(6)
    assert_allclose(forecast.point, expected.predicted_mean, rtol=1e-6)
    half = 1.959964 * np.sqrt(expected.var_pred_mean)
    assert_allclose(forecast.intervals[0].upper - forecast.point, half, rtol=1e-5)
    assert forecast.index[0] == y.index[-1] + y.index.freq


@pytest.mark.parametrize(
    "spec",
    [
        ArimaSpec(order=(1, 1, 1), seasonal_order=(1, 0, 0), constant="drift"),
        ArimaSpec(order=(2, 0, 0), seasonal_order=(0, 0, 0)),
        ArimaSpec(order=(0, 1, 1), seasonal_order=(0, 1, 1)),
    ],
)
def test_forecast_equals_statsmodels_forecast_of_the_filtered_model(spec: ArimaSpec) -> None:
    # forecast() runs the prediction step from the filter's last predicted state itself.
    y = monthly()
    fitted = spec.fit(y, 12)
    forecast = fitted.forecast(30, [0.8])
    o = fitted.orders
    x = None
    if o.constant:
        steps = np.arange(1, len(y) + 31, dtype=float)[:, None]
        x = steps if o.d else np.ones_like(steps)
    model = SARIMAX(
        y.to_numpy(),
        exog=None if x is None else x[: len(y)],
        order=(o.p, o.d, o.q),
        seasonal_order=(o.P, o.D, o.Q, 12),
        trend="n",
        use_exact_diffuse=True,
    )
    direct = model.filter(np.r_[fitted.estimate.values, fitted.estimate.sigma2])
    expected = direct.get_forecast(30, exog=None if x is None else x[len(y) :])
    assert_allclose(forecast.point, expected.predicted_mean, rtol=1e-12)
    half = forecast.intervals[0].upper - forecast.point
    assert_allclose(half, 1.2815515655446004 * np.sqrt(expected.var_pred_mean), rtol=1e-10)


@pytest.mark.parametrize(
    ("spec", "label"),
    [
        (ArimaSpec(order=(2, 0, 0)), "ARIMA(2,0,0), constant: mean"),
        (ArimaSpec(order=(2, 0, 0), constant="none"), "ARIMA(2,0,0)"),
        (ArimaSpec(order=(0, 1, 1), constant="drift"), "ARIMA(0,1,1), constant: drift"),
        (ArimaSpec(order=(0, 1, 1)), "ARIMA(0,1,1)"),
    ],
)
def test_labels_as_box_and_jenkins_write_them(spec: ArimaSpec, label: str) -> None:
    assert spec.fit(monthly(), 1).describe().label == label


def test_drift_forecast_keeps_rising() -> None:
    fitted = ArimaSpec(order=(0, 1, 0), constant="drift").fit(monthly(), 1)
    drift = fitted.describe().parameters["drift"]
    assert drift > 0
    point = fitted.forecast(5, [0.8]).point
    assert_allclose(np.diff(point), drift, rtol=1e-6)


def test_pickle_is_small_and_forecasts_the_same() -> None:
    fitted = ArimaSpec(order=(1, 1, 1), seasonal_order=(0, 1, 1)).fit(monthly(), 12)
    before = fitted.forecast(4, [0.9])
    blob = pickle.dumps(fitted)
    assert len(blob) < 50_000
    after = pickle.loads(blob).forecast(4, [0.9])
    assert_allclose(after.point, before.point)
    assert_allclose(after.intervals[0].lower, before.intervals[0].lower)


def test_refilter_holds_parameters_and_uses_the_new_history() -> None:
    y = monthly()
    fitted = ArimaSpec(order=(1, 1, 0)).fit(y.iloc[:80], 1)
    longer = fitted.refilter(y)
    assert longer.estimate == fitted.estimate
    assert_allclose(longer.fitted_values().iloc[:80], fitted.fitted_values(), rtol=1e-8)
    assert longer.forecast(1, [0.8]).index[0] == y.index[-1] + y.index.freq


def test_describe_reports_criteria_and_ljung_box_with_model_dof() -> None:
    d = ArimaSpec(order=(1, 1, 1)).fit(monthly(), 1).describe()
    assert set(d.information_criteria) >= {"aic", "aicc", "bic"}
    assert d.information_criteria["aicc"] > d.information_criteria["aic"]
    lb = d.residual_diagnostics.ljung_box
    assert lb is not None and lb.degrees_of_freedom == lb.lag - 2


def regressor_case() -> tuple[pd.Series, pd.DataFrame]:
    rng = np.random.default_rng(11)
    n = 80
    index = pd.date_range("2020-01-06", periods=n, freq="W-MON")
    promotion = (rng.random(n) < 0.3).astype(float)
    noise = np.zeros(n)
    for t in range(1, n):
        noise[t] = 0.5 * noise[t - 1] + rng.normal(0, 1)
    y = pd.Series(100 + 8 * promotion + noise, index=index)
    return y, pd.DataFrame({"promotion": promotion}, index=index)


def test_regressor_effect_is_estimated_and_used_in_the_forecast() -> None:
    y, x = regressor_case()
    fitted = ArimaSpec(order=(1, 0, 0)).fit(y, 1, regressors=x)
    assert_allclose(fitted.describe().parameters["promotion"], 8.0, atol=0.6)
    on = fitted.forecast(2, [0.8], future_regressors=pd.DataFrame({"promotion": [1.0, 1.0]}))
    off = fitted.forecast(2, [0.8], future_regressors=pd.DataFrame({"promotion": [0.0, 0.0]}))
    assert_allclose(on.point - off.point, fitted.describe().parameters["promotion"])


@pytest.mark.parametrize(
    ("future", "field"),
    [
        (None, "regressors[0].future"),
        (pd.DataFrame({"promotion": [1.0]}), "regressors[0].future"),
        (pd.DataFrame({"promotion": [1.0, np.nan]}), "regressors[0].future[1]"),
        (pd.DataFrame({"other": [1.0, 1.0]}), "regressors[0].future"),
    ],
)
def test_bad_future_regressors_name_the_field(future: pd.DataFrame | None, field: str) -> None:
    y, x = regressor_case()
    fitted = ArimaSpec(order=(1, 0, 0)).fit(y, 1, regressors=x)
    with pytest.raises(RequestError) as caught:
        fitted.forecast(2, [0.8], future_regressors=future)
    assert caught.value.problems[0].field == field


def test_misaligned_history_is_refused() -> None:
    y, x = regressor_case()
    with pytest.raises(RequestError) as caught:
        ArimaSpec(order=(1, 0, 0)).fit(y, 1, regressors=x.iloc[1:])
    assert caught.value.problems[0].field == "regressors[0].history"


def test_orders_too_large_for_the_data() -> None:
    y = monthly(12)
    with pytest.raises(FitError) as caught:
        ArimaSpec(order=(6, 1, 5)).fit(y, 1)
    assert caught.value.problems[0].field == "model.order"


def test_seasonal_model_needs_two_full_seasons() -> None:
    with pytest.raises(FitError) as caught:
        ArimaSpec(order=(0, 1, 1), seasonal_order=(0, 1, 1)).fit(monthly(20), 12)
    assert caught.value.problems[0].field == "model.seasonal_order"


@pytest.mark.parametrize(
    "spec",
    [
        ArimaSpec(order=(0, 2, 1), constant="drift"),
        ArimaSpec(order=(0, 1, 1), constant="mean"),
        ArimaSpec(order=(0, 0, 1), seasonal_order=(0, 0, 0), constant="drift"),
        ArimaSpec(order=(1, 1, 0), constant="mean", seasonal_order=None),
    ],
)
def test_a_named_constant_must_match_the_differencing(spec: ArimaSpec) -> None:
    with pytest.raises(SpecificationError) as caught:
        spec.fit(monthly(), 12)
    assert caught.value.problems[0].field == "model.constant"


@pytest.mark.parametrize(("constant", "total"), [("mean", 0), ("drift", 1)])
def test_a_named_constant_sets_the_searched_differencing(constant: str, total: int) -> None:
    fitted = ArimaSpec(constant=constant, search="quick").fit(monthly(), 1)
    assert fitted.orders.d + fitted.orders.D == total
    assert fitted.orders.constant
    assert fitted.describe().label.endswith(f", constant: {constant}")


def test_no_constant_means_none() -> None:
    assert not ArimaSpec(constant="none", search="quick").fit(monthly(), 1).orders.constant


def test_the_former_constant_option_is_refused_naming_the_new_one() -> None:
    with pytest.raises(SpecificationError) as caught:
        registry.specification_from_dict({"family": "arima", "include_constant": True})
    assert caught.value.problems[0].field == "model.include_constant"
    assert "model.constant" in caught.value.problems[0].message


def test_registry_checks_order_length() -> None:
    with pytest.raises(SpecificationError) as caught:
        registry.specification_from_dict({"family": "arima", "order": [1, 1]})
    assert caught.value.problems[0].field == "model.order"


def test_searched_orders_on_a_short_seasonal_series_warn_and_stay_non_seasonal() -> None:
    fitted = ArimaSpec().fit(monthly(26), 12)
    assert fitted.orders.P == fitted.orders.Q == fitted.orders.D == 0
    assert any(w.code == "seasonal_terms_skipped" for w in fitted.warnings)


def test_quick_search_is_a_catalogued_choice_and_fits() -> None:
    fitted = ArimaSpec(search="quick").fit(monthly(), 12)
    assert fitted.search is not None
    assert sum(row.exact_aicc is not None for row in fitted.search.table) <= 2
    with pytest.raises(SpecificationError) as caught:
        ArimaSpec(search="fast")
    assert caught.value.problems[0].field == "model.search"


def test_higher_orders_keep_the_better_of_two_starts(monkeypatch) -> None:  # type: ignore[no-untyped-def]
    """With p + q >= 4 the final fit also starts from zero coefficients: its likelihood is
    never below the single start's."""
    from service.core.models.arima import family
    from service.core.models.arima.orders import ArimaOrders

    rng = np.random.default_rng(3)
    e = rng.normal(size=260)
    x = np.zeros_like(e)
    for t in range(2, e.size):
        x[t] = 0.5 * x[t - 1] - 0.3 * x[t - 2] + e[t] + 0.4 * e[t - 1] + 0.2 * e[t - 2]
    orders = ArimaOrders(2, 0, 2, 0, 0, 0, 1, False)
    single = family.SECOND_START_ORDER
    monkeypatch.setattr(family, "SECOND_START_ORDER", 99)
    one = family._final_fit(x[60:], None, (), orders, None)
    monkeypatch.setattr(family, "SECOND_START_ORDER", single)
    two = family._final_fit(x[60:], None, (), orders, None)
    assert two.loglik >= one.loglik - 1e-9
