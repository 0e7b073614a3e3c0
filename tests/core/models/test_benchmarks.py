"""What is particular to the four benchmark families, on demo-scenario series: missing
values, the refilter's parameters, their descriptions. What every family shares (two fits
agree, the input is untouched, index and nested bounds, pickling) is the contract suite's
(test_contract.py), which runs these families too."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from service import demo
from service.core.data.series import ParsedSeries, parse_series
from service.core.errors import FitError
from service.core.models.drift import DriftSpec
from service.core.models.mean import MeanSpec
from service.core.models.naive import NaiveSpec
from service.core.models.registry import specification_from_dict
from service.core.models.seasonal_naive import SeasonalNaiveSpec

SPECS = {
    "mean": MeanSpec(),
    "naive": NaiveSpec(),
    "seasonal_naive": SeasonalNaiveSpec(),
    "drift": DriftSpec(),
}


def demo_series(name: str) -> ParsedSeries:
    """One demo series, parsed as the service would."""
    s = demo.SCENARIO[name]()
    return parse_series(s.values, start=s.start, frequency=s.frequency)


@pytest.mark.parametrize("family", list(SPECS))
def test_refilter_keeps_the_parameters_and_uses_the_new_history(family: str) -> None:
    parsed = demo_series("energy")
    y, m = parsed.y, parsed.seasonal_period
    short = y.iloc[:96]
    fitted = SPECS[family].fit(short, m)
    moved = fitted.refilter(y)
    assert moved.describe().parameters == fitted.describe().parameters
    assert moved.sigma == fitted.sigma
    assert moved.forecast(3, [0.8]).index[0] == y.index[-1] + y.index.freq
    refit = SPECS[family].fit(y, m)
    if family == "naive":
        assert moved.forecast(1, [0.8]).point[0] == y.iloc[-1]
    if family != "mean":  # the mean is a parameter; the others follow the new history
        assert moved.forecast(1, [0.8]).point[0] != fitted.forecast(1, [0.8]).point[0]
    assert moved.describe().parameters != refit.describe().parameters


def test_naive_uses_the_last_observed_value_when_the_tail_is_missing() -> None:
    parsed = demo_series("fuel")
    y, m = parsed.y, parsed.seasonal_period
    values = y.to_numpy().copy()
    values[-3:] = np.nan
    holed = pd.Series(values, index=y.index)
    forecast = NaiveSpec().fit(holed, m).forecast(4, [0.8])
    np.testing.assert_array_equal(forecast.point, np.full(4, values[-4]))
    assert np.all(np.isfinite(forecast.intervals[0].lower))


def test_seasonal_naive_falls_back_one_cycle_for_a_missing_season() -> None:
    parsed = demo_series("orders")
    y, m = parsed.y, parsed.seasonal_period
    values = y.to_numpy().copy()
    values[-2] = np.nan
    holed = pd.Series(values, index=y.index)
    point = SeasonalNaiveSpec().fit(holed, m).forecast(m, [0.8]).point
    assert point[m - 2] == values[-2 - m]
    assert point[0] == values[-m]
    assert np.all(np.isfinite(point))


def test_mean_and_drift_ignore_kept_missing_values() -> None:
    y = pd.Series(
        [1.0, np.nan, 3.0, 4.0, 5.0, np.nan, 8.0],
        index=pd.date_range("2025-01-01", periods=7, freq="D"),
    )
    assert MeanSpec().fit(y).forecast(1, [0.8]).point[0] == pytest.approx(4.2)
    fitted = DriftSpec().fit(y)
    assert fitted.parameters["drift"] == pytest.approx(1.0)  # the changes 3->4 and 4->5
    np.testing.assert_allclose(fitted.forecast(2, [0.8]).point, [9.0, 10.0])


def test_drift_continues_from_the_last_observation_across_a_missing_tail() -> None:
    index = pd.date_range("2025-01-01", periods=6, freq="D")
    full = pd.Series([1.0, 2.0, 3.0, 4.0, 5.0, 6.0], index=index)
    holed = pd.Series([1.0, 2.0, 3.0, 4.0, np.nan, np.nan], index=index)
    fitted = DriftSpec().fit(holed)
    # The last observation is 4 on day 4; day 7 is three steps after it.
    np.testing.assert_allclose(fitted.forecast(2, [0.8]).point, [7.0, 8.0])
    np.testing.assert_allclose(
        fitted.forecast(2, [0.8]).point, DriftSpec().fit(full).forecast(2, [0.8]).point
    )


def test_missing_values_parsed_with_keep_are_forecast() -> None:
    s = demo.orders()
    values: list[float | None] = list(s.values)
    values[-1] = None
    parsed = parse_series(values, start=s.start, frequency=s.frequency, missing="keep")
    assert np.isnan(parsed.y.iloc[-1])
    point = NaiveSpec().fit(parsed.y, parsed.seasonal_period).forecast(2, [0.8]).point
    np.testing.assert_array_equal(point, [s.values[-2]] * 2)


def test_seasonal_naive_needs_more_than_one_season() -> None:
    parsed = demo_series("orders")
    y, _ = parsed.y, parsed.seasonal_period
    with pytest.raises(FitError) as caught:
        SeasonalNaiveSpec().fit(y.iloc[:52], 52)
    assert caught.value.problems[0].field == "series.values"


def test_drift_needs_two_changes() -> None:
    y = pd.Series([1.0, np.nan, 2.0], index=pd.date_range("2025-01-01", periods=3, freq="D"))
    with pytest.raises(FitError):
        DriftSpec().fit(y)


@pytest.mark.parametrize("family", list(SPECS))
def test_specifications_come_from_their_json_form(family: str) -> None:
    assert specification_from_dict({"family": family}) == SPECS[family]


@pytest.mark.parametrize("family", list(SPECS))
def test_describe_names_the_family_and_counts_observations(family: str) -> None:
    parsed = demo_series("parcels")
    y, m = parsed.y, parsed.seasonal_period
    description = SPECS[family].fit(y, m).describe()
    assert description.family == family
    assert description.observations == y.size
    assert description.specification == {"family": family}
    assert description.residual_variance == pytest.approx(description.parameters["sigma"] ** 2)
