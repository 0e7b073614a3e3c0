"""Dynamic harmonic regression: golden values against a direct SARIMAX with the same Fourier
regressors, harmonics by AICc, non-integer periods, the weekly shape of hourly counts."""

from __future__ import annotations

import pickle
import warnings

import numpy as np
import pandas as pd
import pytest
from statsmodels.tsa.statespace.sarimax import SARIMAX

from service.core.errors import FitError
from service.core.models.harmonic.family import HarmonicSpec
from service.core.models.harmonic.terms import FourierTerms, max_harmonics
from service.core.models.seasonal_naive import SeasonalNaiveSpec
from service.core.models.transforms import Transform, TransformedSpec
from tests.multi_period_series import (
    WEEKEND_FACTOR,
    daily_calls,
    hourly_counts,
    hourly_rate,
)


def _fourier(t: np.ndarray, period: float, k: int) -> list[np.ndarray]:
    """Written out here, independently of the module: sin and cos of 2πkt/period."""
    return [np.sin(2 * np.pi * k * t / period), np.cos(2 * np.pi * k * t / period)]


def test_forecasts_equal_a_direct_sarimax_at_the_same_parameters() -> None:
    y = hourly_counts(weeks=6)
    fitted = HarmonicSpec(periods=(24.0, 168.0)).fit(y)
    terms, errors = fitted.terms, fitted.errors
    t = np.arange(len(y) + 48, dtype=float)
    columns = [np.ones_like(t)]
    for name, _ in terms.frequencies():
        k, period = name.split("/")
        columns += _fourier(t, float(period), int(k))
    x = np.column_stack(columns)
    if errors.d:
        x = x[:, 1:]
    beta = fitted.coefficients[1:] if errors.d else fitted.coefficients
    model = SARIMAX(
        y.to_numpy(),
        exog=x[: len(y)],
        order=(errors.p, errors.d, errors.q),
        trend="n",
        use_exact_diffuse=True,
    )
    params = np.r_[beta, errors.ar, errors.ma, errors.sigma2]
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        direct = model.filter(params).get_forecast(48, exog=x[len(y) :])
    ours = fitted.forecast(48, [0.95])
    np.testing.assert_allclose(ours.point, direct.predicted_mean, rtol=1e-9)
    lower = np.asarray(direct.conf_int(alpha=0.05))[:, 0]
    np.testing.assert_allclose(ours.intervals[0].lower, lower, rtol=1e-9, atol=1e-9)


def test_estimates_are_close_to_a_direct_maximum_likelihood_fit() -> None:
    # Feasible GLS against SARIMAX's joint maximum likelihood on the same regressors: the
    # two estimators differ, so the honest check is on the forecasts, within 2 % of the level
    # (measured: 1.2 % at most on this series).
    y = daily_calls(years=2, extra=30)
    fitted = HarmonicSpec(periods=(7.0, 365.25), harmonics=(3, 2)).fit(y)
    errors = fitted.errors
    t = np.arange(len(y) + 28, dtype=float)
    x = fitted.terms.matrix(t)
    if errors.d:
        x = x[:, 1:]
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        direct = (
            SARIMAX(y.to_numpy(), exog=x[: len(y)], order=(errors.p, errors.d, errors.q))
            .fit(disp=False)
            .get_forecast(28, exog=x[len(y) :])
        )
    ours = fitted.forecast(28, [0.8])
    level = float(y.mean())
    np.testing.assert_allclose(ours.point, direct.predicted_mean, atol=0.02 * level)


def test_harmonics_by_aicc_are_few_for_a_sine_and_more_for_a_sharp_weekly_step() -> None:
    y = hourly_counts(weeks=8)
    fitted = HarmonicSpec(periods=(24.0, 168.0)).fit(y)
    daily, weekly = fitted.terms.harmonics
    # The daily profile is one sine; the weekend step needs several weekly harmonics.
    assert daily <= 3
    assert weekly >= 3
    assert "harmonic regression (periods 24, 168; harmonics" in fitted.describe().label


def test_repeated_frequencies_are_left_out_of_the_longer_period() -> None:
    terms = FourierTerms((24.0, 168.0), (2, 8))
    names = [name for name, _ in terms.frequencies()]
    assert "7/168" not in names and "1/24" in names
    assert len(names) == 2 + 7


def test_non_integer_periods_are_used_as_they_are() -> None:
    y = daily_calls(years=3)
    fitted = HarmonicSpec(periods=(7.0, 365.25)).fit(y)
    assert fitted.terms.periods == (7.0, 365.25)
    assert "365.25" in fitted.describe().label
    assert max_harmonics(7.0) == 3


def test_weekday_and_weekend_levels_of_the_generating_process_are_recovered() -> None:
    y = hourly_counts(weeks=6, extra=168)
    train = y.iloc[:-168]
    fc = HarmonicSpec(periods=(24.0, 168.0)).fit(train).forecast(168, [0.8])
    weekend = fc.index.day_of_week >= 5
    truth = hourly_rate(y.index)[-168:]
    # Within 10 % of the generating means: weekdays and weekends apart, not one level.
    assert fc.point[~weekend].mean() == pytest.approx(truth[~weekend].mean(), rel=0.10)
    assert fc.point[weekend].mean() == pytest.approx(truth[weekend].mean(), rel=0.10)
    ratio = fc.point[weekend].mean() / fc.point[~weekend].mean()
    assert ratio == pytest.approx(WEEKEND_FACTOR, abs=0.1)


def test_beats_seasonal_naive_at_the_weekly_period_by_ten_percent() -> None:
    scores = []
    for seed in (1, 2, 3):
        y = hourly_counts(weeks=6, seed=seed, extra=168)
        train, test = y.iloc[:-168], y.to_numpy()[-168:]
        ours = HarmonicSpec(periods=(24.0, 168.0)).fit(train).forecast(168, [0.8]).point
        naive = SeasonalNaiveSpec().fit(train, 168).forecast(168, [0.8]).point
        scores.append(np.mean(np.abs(test - ours)) / np.mean(np.abs(test - naive)))
    assert float(np.mean(scores)) < 0.9


def test_yearly_cycle_of_daily_calls_beats_last_years_values() -> None:
    # Weekly and yearly cycles multiply in the generating process: additive on the log scale.
    y = daily_calls(years=3, extra=28)
    train, test = y.iloc[:-28], y.to_numpy()[-28:]
    spec = TransformedSpec(HarmonicSpec(periods=(7.0, 365.25)), Transform("log"))
    error = np.mean(np.abs(test - spec.fit(train, 7).forecast(28, [0.8]).point))
    year = SeasonalNaiveSpec().fit(train, 365).forecast(28, [0.8]).point
    same_weekday = SeasonalNaiveSpec().fit(train, 364).forecast(28, [0.8]).point
    # Seasonal naive at the longest period (365) by half; last year's same weekday by 15 %.
    assert error < 0.5 * np.mean(np.abs(test - year))
    assert error < 0.85 * np.mean(np.abs(test - same_weekday))


def test_refilter_keeps_positions_from_the_first_fitted_timestamp() -> None:
    y = hourly_counts(weeks=5)
    fitted = HarmonicSpec(periods=(24.0, 168.0)).fit(y.iloc[:600])
    again = fitted.refilter(y)
    assert len(again.fitted_values()) == len(y)
    full = pickle.loads(pickle.dumps(again)).forecast(24, [0.8])
    assert np.all(np.isfinite(full.point))


def test_too_short_for_a_period_names_it() -> None:
    y = pd.Series(np.arange(100.0), index=pd.date_range("2026-01-01", periods=100, freq="h"))
    with pytest.raises(FitError) as caught:
        HarmonicSpec(periods=(24.0, 168.0)).fit(y)
    assert caught.value.problems[0].field == "model.periods[1]"


@pytest.mark.parametrize("periods", [(24.0, 168.0), (24.0,)])
def test_refilter_onto_a_longer_history_forecasts_as_a_whole_new_filter(
    periods: tuple[float, ...],
) -> None:
    # A later backtest origin continues the fitted state over the new points only; the
    # forecasts must match a filter run over the whole longer history from the start.
    y = hourly_counts(weeks=5, extra=100)
    fitted = HarmonicSpec(periods=periods).fit(y.iloc[:700])
    for end in (700, 724, 800, len(y)):
        continued = fitted.refilter(y.iloc[:end])
        whole = fitted.refilter(y.iloc[:end])
        whole._earlier = None  # what an unpickled copy does: the whole history filtered
        ours, theirs = continued.forecast(48, [0.8, 0.95]), whole.forecast(48, [0.8, 0.95])
        np.testing.assert_allclose(ours.point, theirs.point, rtol=1e-8, atol=1e-8)
        for a, b in zip(ours.intervals, theirs.intervals, strict=True):
            np.testing.assert_allclose(a.lower, b.lower, rtol=1e-8, atol=1e-8)
            np.testing.assert_allclose(a.upper, b.upper, rtol=1e-8, atol=1e-8)
    assert fitted.refilter(y)._earlier is fitted
    assert fitted.refilter(y.iloc[:500])._earlier is None  # shorter: filtered whole
    changed = y.copy()
    changed.iloc[10] += 1.0
    assert fitted.refilter(changed)._earlier is None  # another past: filtered whole


def test_the_settled_structure_keeps_the_chosen_harmonics_for_another_history() -> None:
    y = hourly_counts(weeks=6)
    fitted = HarmonicSpec(periods=(24.0, 168.0)).fit(y)
    settled = fitted.settled_structure()
    assert settled.periods == (24.0, 168.0) and settled.harmonics == fitted.terms.harmonics
    again = settled.fit(y.iloc[:-100])
    assert again.terms == fitted.terms


def test_the_settled_structure_keeps_the_error_order_for_another_history() -> None:
    # What a backtest scores before its first origin is what the whole series delivers.
    y = daily_calls(3, seed=2)
    fitted = HarmonicSpec(periods=(7.0, 365.25)).fit(y)
    e = fitted.errors
    settled = fitted.settled_structure()
    assert settled.error_order == (e.p, e.d, e.q)
    for end in (len(y) - 28, len(y) - 200, 800):
        again = settled.fit(y.iloc[:end]).errors
        assert (again.p, again.d, again.q) == (e.p, e.d, e.q)
        assert len(again.ar) == e.p and len(again.ma) == e.q


def test_an_error_order_out_of_range_names_the_field() -> None:
    y = hourly_counts(weeks=3)
    for order in ((4, 0, 0), (1, 2, 0), (0, 0, 3), (1, 0)):
        with pytest.raises(FitError) as caught:
            HarmonicSpec(periods=(24.0,), error_order=order).fit(y)
        assert caught.value.problems[0].field == "model.error_order"
