"""MSTL then a non-seasonal base: components against statsmodels' MSTL, the weekly shape of
hourly counts, intervals wider than the base model's, refiltering without peeking."""

from __future__ import annotations

import pickle

import numpy as np
import pytest

from service.core.diagnostics.cycles import mstl_parts
from service.core.errors import FitError
from service.core.models.ets.family import EtsSpec
from service.core.models.mstl import MstlSpec
from service.core.models.seasonal_naive import SeasonalNaiveSpec
from tests.multi_period_series import direct_mstl, hourly_counts, hourly_rate


def test_components_are_statsmodels_mstl_with_the_stated_settings() -> None:
    y = hourly_counts(weeks=4).to_numpy()
    ours = mstl_parts(y, (24, 168))
    direct = direct_mstl(y, [24, 168])
    np.testing.assert_allclose(ours.seasonal, np.asarray(direct.seasonal), rtol=1e-12)
    np.testing.assert_allclose(ours.remainder, np.asarray(direct.resid), rtol=1e-12, atol=1e-9)


def test_label_names_periods_and_base() -> None:
    fitted = MstlSpec(periods=(24.0, 168.0)).fit(hourly_counts(weeks=4))
    assert fitted.describe().label.startswith("MSTL (periods 24, 168) then ETS(")


def test_weekday_and_weekend_levels_are_recovered() -> None:
    y = hourly_counts(weeks=6, extra=168)
    fc = MstlSpec(periods=(24.0, 168.0)).fit(y.iloc[:-168]).forecast(168, [0.8])
    weekend = fc.index.day_of_week >= 5
    truth = hourly_rate(y.index)[-168:]
    assert fc.point[~weekend].mean() == pytest.approx(truth[~weekend].mean(), rel=0.10)
    assert fc.point[weekend].mean() == pytest.approx(truth[weekend].mean(), rel=0.10)


def test_beats_seasonal_naive_at_the_weekly_period() -> None:
    ratios = []
    for seed in (1, 2, 3):
        y = hourly_counts(weeks=6, seed=seed, extra=168)
        train, test = y.iloc[:-168], y.to_numpy()[-168:]
        ours = MstlSpec(periods=(24.0, 168.0)).fit(train).forecast(168, [0.8]).point
        naive = SeasonalNaiveSpec().fit(train, 168).forecast(168, [0.8]).point
        ratios.append(np.mean(np.abs(test - ours)) / np.mean(np.abs(test - naive)))
    assert float(np.mean(ratios)) < 0.95


def test_intervals_are_the_base_models_widened_for_the_seasonal_components() -> None:
    y = hourly_counts(weeks=4)
    fitted = MstlSpec(periods=(24.0, 168.0)).fit(y)
    fc = fitted.forecast(24, [0.8])
    inner = fitted.base.forecast(24, [0.8])
    assert fitted.spread is not None and fitted.spread > 0
    ours = fc.intervals[0].upper - fc.intervals[0].lower
    base = inner.intervals[0].upper - inner.intervals[0].lower
    assert np.all(ours > base)


def test_refilter_holds_the_components_and_keeps_the_spread() -> None:
    y = hourly_counts(weeks=5)
    fitted = MstlSpec(periods=(24.0, 168.0), base=EtsSpec(season="none")).fit(y.iloc[:600])
    again = pickle.loads(pickle.dumps(fitted.refilter(y)))
    assert again.spread == fitted.spread
    assert np.all(np.isfinite(again.forecast(24, [0.8]).point))
    np.testing.assert_allclose(again.components.iloc[:600].to_numpy(), fitted.components.to_numpy())


def test_too_short_names_the_period() -> None:
    with pytest.raises(FitError) as caught:
        MstlSpec(periods=(24.0, 168.0)).fit(hourly_counts(weeks=1))
    assert caught.value.problems[0].field == "model.periods[1]"
