"""Several seasonal periods in the diagnostics: MSTL strengths against statsmodels directly,
candidate periods from the data, outliers on the MSTL remainder, findings naming the cycles."""

from __future__ import annotations

from types import SimpleNamespace

import numpy as np
import pytest
from pandas.tseries.frequencies import to_offset

from service.core.data.periods import cycle_name
from service.core.diagnostics.report import diagnose
from service.core.diagnostics.seasonality import fundamental
from service.core.selection.candidates import candidate_rules, profile_series
from service.core.selection.summary import auto_summary
from tests.multi_period_series import daily_calls, direct_mstl, hourly_counts


def test_strengths_equal_those_of_statsmodels_mstl_called_directly() -> None:
    y = hourly_counts(weeks=6)
    report = diagnose(y, 24, periods=(24.0, 168.0))
    several = report.seasonality.several  # type: ignore[union-attr]
    assert several is not None
    direct = direct_mstl(y.to_numpy(), [24, 168])
    seasonal = np.asarray(direct.seasonal)
    resid = np.asarray(direct.resid)
    for i, found in enumerate(several.periods):
        expected = max(0.0, 1 - np.var(resid) / np.var(seasonal[:, i] + resid))
        assert found.strength == pytest.approx(expected, rel=1e-10)
    assert several.periods_that_matter == (24.0, 168.0)


def test_a_daily_series_with_a_weekly_cycle_reports_seven_not_three() -> None:
    report = diagnose(daily_calls(years=1), 7)
    periods = [c.period for c in report.seasonality.candidates]  # type: ignore[union-attr]
    assert periods[0] == 7
    assert 3 not in periods and 4 not in periods
    assert fundamental(3.5, 365) == 7 and fundamental(7 / 3, 365) == 7
    assert fundamental(24.0, 1000) == 24


def test_clean_two_cycle_data_yields_few_outliers_on_the_mstl_remainder() -> None:
    y = hourly_counts(weeks=12)
    two = diagnose(y, 24, periods=(24.0, 168.0)).outliers
    one = diagnose(y, 24).outliers
    # Poisson noise only: a handful per thousand, and fewer than the one-cycle remainder
    # (where the weekend swing looks like outliers).
    assert two.count < 0.02 * len(y)  # type: ignore[union-attr]
    assert two.count < one.count  # type: ignore[union-attr]


def test_findings_name_the_cycles_that_drive_the_series() -> None:
    report = diagnose(daily_calls(years=3), 7, periods=(7.0, 365.25))
    text = "The weekly (7 steps) and yearly (365.25 steps) cycles drive the series"
    assert any(f.startswith(text) for f in report.findings)
    hourly = diagnose(hourly_counts(weeks=6), 24, periods=(24.0, 168.0))
    text = "The daily (24 steps) and weekly (168 steps) cycles drive the series"
    assert any(f.startswith(text) for f in hourly.findings)


@pytest.mark.parametrize(
    ("period", "freq", "name"),
    [
        (24, "h", "daily"),
        (168, "h", "weekly"),
        (48, "30min", "daily"),
        (7, "D", "weekly"),
        (365.25, "D", "yearly"),
        (365, "D", "yearly"),
        (52.18, "W-SUN", "yearly"),
        (12, "MS", "yearly"),
        (4, "QS", "yearly"),
        (5, "B", "weekly"),
        (60, "s", "minute-long"),
        (10, "D", None),
        (100, "h", None),
    ],
)
def test_cycles_are_named_by_their_calendar_length(
    period: float, freq: str, name: str | None
) -> None:
    assert cycle_name(period, to_offset(freq)) == name


def test_auto_considers_mstl_and_harmonic_regression_for_several_periods() -> None:
    y = hourly_counts(weeks=6)
    report = diagnose(y, 24, periods=(24.0, 168.0))
    profile = profile_series(y, 24, report)
    families = [data["family"] for data, _ in candidate_rules(profile)]
    assert "mstl" in families and families.count("harmonic_regression") == 2
    # Counts: MSTL on the log scale, harmonic regression on both scales.
    mstl = next(data for data, _ in candidate_rules(profile) if data["family"] == "mstl")
    assert mstl.get("transform") == "log"
    # Beside them, the models of fewer periods go: STL at 24 alone, and ETS and the
    # SES/Holt/damped average fitted without a period (24 is long); the benchmarks stay.
    assert not {"stl", "ets", "combination"} & set(families)
    assert {"naive", "seasonal_naive", "drift"} <= set(families)
    single = profile_series(y, 24, diagnose(y, 24))
    families = [data["family"] for data, _ in candidate_rules(single)]
    assert "mstl" not in families and {"stl", "ets", "combination"} <= set(families)


def test_one_long_period_keeps_the_models_without_a_period_beside_mstl() -> None:
    y = hourly_counts(weeks=6)
    profile = profile_series(y, 168, diagnose(y, 168))
    families = [data["family"] for data, _ in candidate_rules(profile)]
    assert "mstl" in families and {"stl", "ets", "combination"} <= set(families)


def test_the_forecast_summary_names_every_period_that_matters() -> None:
    y = hourly_counts(weeks=6)
    profile = profile_series(y, 24, diagnose(y, 24, periods=(24.0, 168.0)))
    selection = SimpleNamespace(
        profile=profile,
        benchmark="seasonal naive, period 24",
        skill_over_naive=0.5,
        rule="combination",
        calibration=None,
    )
    assert auto_summary(selection).startswith(
        "Seasonal series with cycles of 24 and 168 steps; the forecast beat seasonal naive"
    )


def test_with_few_weekly_cycles_the_models_of_fewer_periods_stay() -> None:
    # Three weeks: MSTL and harmonic regression may not fit before the backtest's first
    # origin, so STL and the models without a period stay beside them.
    y = hourly_counts(weeks=3)
    profile = profile_series(y, 24, diagnose(y, 24, periods=(24.0, 168.0)))
    families = [data["family"] for data, _ in candidate_rules(profile)]
    assert "mstl" in families and {"stl", "ets", "combination"} <= set(families)
