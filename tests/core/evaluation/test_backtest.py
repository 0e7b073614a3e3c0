"""Rolling-origin backtests: origins, no peeking, hand-computed scores, failures as data."""

from __future__ import annotations

import json
import warnings
from dataclasses import dataclass
from typing import ClassVar

import numpy as np
import pandas as pd
import pytest

from service.api.render import backtest_body
from service.core.errors import RequestError
from service.core.evaluation.backtest import backtest, label_of, run
from service.core.evaluation.origins import Plan, estimated_again_at, plan_origins
from service.core.models.arima.family import ArimaSpec
from service.core.models.base import Specification
from service.core.models.drift import DriftSpec
from service.core.models.ets.family import EtsSpec
from service.core.models.naive import NaiveSpec
from service.core.models.registry import specification_from_dict
from service.core.models.seasonal_naive import SeasonalNaiveSpec
from service.core.models.transforms import Transform, TransformedSpec

HAND = [3.0, 5.0, 4.0, 6.0, 8.0, 7.0, 6.0, 7.0, 8.0, 7.0, 9.0, 8.0]


def monthly(values: list[float] | np.ndarray) -> pd.Series:
    index = pd.date_range("2020-01-01", periods=len(values), freq="MS")
    return pd.Series(np.asarray(values, dtype=float), index=index)


@dataclass(frozen=True)
class BrokenSpec:
    """A candidate whose library call fails, as a statsmodels fit sometimes does."""

    family: ClassVar[str] = "broken"
    summary: ClassVar[str] = "always fails"

    def fit(self, y: pd.Series, seasonal_period: int = 1) -> NaiveSpec:
        raise np.linalg.LinAlgError("singular matrix")


def test_origins_end_at_the_last_point() -> None:
    plan = plan_origins(40, horizon=6, origins=3, step=4)
    assert plan.origins == (26, 30, 34)


def test_estimated_again_only_where_the_new_points_count() -> None:
    # 22 points before the first origin, 6 more at each later one: estimated again at each.
    assert estimated_again_at(Plan((22, 28, 34), 6, 6)) == (28, 34)
    # 2,856 points, 48 more (1.7 %): not worth a fit; 96 more (3.4 %): estimated again.
    assert estimated_again_at(Plan((2856, 2904, 2952), 48, 48)) == (2952,)
    # 9,856 points: neither 48 nor 96 more reach 2 %.
    assert estimated_again_at(Plan((9856, 9904, 9952), 48, 48)) == ()
    assert estimated_again_at(Plan((40,), 6, 6)) == ()


def test_too_few_points_names_the_fields() -> None:
    with pytest.raises(RequestError) as info:
        plan_origins(20, horizon=6, origins=3, step=4)
    assert {p.field for p in info.value.problems} == {"origins", "horizon", "step"}


def test_naive_scores_by_hand() -> None:
    # history HAND[:10]: last value 7, lag-1 MAE 12/9; test [9, 8] -> MAE 1.5, MASE 1.125.
    report = backtest(monthly(HAND), [NaiveSpec()], horizon=2, origins=1, coverage=(0.8,))
    model = report.models[0]
    steps = model.steps()
    assert [s.mae for s in steps] == pytest.approx([2.0, 1.0])
    assert model.score("mae") == pytest.approx(1.5, abs=1e-12)
    assert model.score("mase") == pytest.approx(1.5 / (12 / 9), abs=1e-12)
    assert model.score("rmse") == pytest.approx(np.sqrt(2.5), abs=1e-12)
    assert model.score("smape") == pytest.approx(np.mean([200 * 2 / 16, 200 * 1 / 15]))


def test_parameters_come_from_before_the_first_origin() -> None:
    y = monthly(np.concatenate([np.arange(20.0), 20.0 + 5.0 * np.arange(1, 11)]))
    report = backtest(y, [DriftSpec()], horizon=2, origins=3, step=2)
    first = report.models[0].forecasts[0]
    last = report.models[0].forecasts[-1]
    slope_before = float(np.mean(np.diff(y.to_numpy()[:24])))
    # The last origin re-filters on a longer history but keeps the early slope.
    history_end = y.to_numpy()[27]
    assert last.point == pytest.approx(history_end + slope_before * np.array([1.0, 2.0]))
    assert first.origin == y.index[24]


def test_refit_at_estimates_again_before_the_later_origins() -> None:
    # Origins 24, 26, 28 with estimates again at 26 and 28: each origin forecasts with the
    # slope of the points before it, the one between none (a plan of 3 origins 2 apart).
    y = monthly(np.concatenate([np.arange(20.0), 20.0 + 5.0 * np.arange(1, 11)]))
    plan = plan_origins(len(y), horizon=2, origins=3, step=2)
    [model] = run(y, [DriftSpec()], 1, plan, (0.8,), refit_at=plan.origins[1:])
    values = y.to_numpy()
    for origin, fc in zip(plan.origins, model.forecasts, strict=True):
        slope = float(np.mean(np.diff(values[:origin])))
        assert fc.point == pytest.approx(values[origin - 1] + slope * np.array([1.0, 2.0]))


def test_refit_at_keeps_the_earlier_estimate_between_refits() -> None:
    # Origins 24, 25, 26, 27, 28 with one estimate again at 26: origins 24-25 use the slope
    # before 24, origins 26-28 the slope before 26.
    y = monthly(np.concatenate([np.arange(20.0), 20.0 + 5.0 * np.arange(1, 11)]))
    plan = plan_origins(len(y), horizon=2, origins=5, step=1)
    [model] = run(y, [DriftSpec()], 1, plan, (0.8,), refit_at=(26,))
    values = y.to_numpy()
    for origin, fc in zip(plan.origins, model.forecasts, strict=True):
        estimated = 24 if origin < 26 else 26
        slope = float(np.mean(np.diff(values[:estimated])))
        assert fc.point == pytest.approx(values[origin - 1] + slope * np.array([1.0, 2.0]))


def test_every_origin_estimation_is_one_fit_per_origin() -> None:
    rng = np.random.default_rng(5)
    y = monthly(40 + rng.normal(0, 1, 48).cumsum())
    spec = EtsSpec("add", "none", False, "none")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        report = backtest(y, [spec], horizon=4, origins=3, step=4, estimation="every_origin")
        for fc in report.models[0].forecasts:
            origin = int(y.index.get_loc(fc.origin))
            own = spec.fit(y.iloc[:origin], 1).forecast(4, (0.8, 0.95))
            # The later fits start from the earlier estimate: the same optimum, to the
            # optimiser's tolerance.
            np.testing.assert_allclose(fc.point, own.point, rtol=1e-3)
    assert report.estimation == "every_origin"
    with pytest.raises(RequestError) as info:
        backtest(y, [spec], horizon=4, estimation="always")
    assert info.value.problems[0].field == "estimation"


@dataclass(frozen=True)
class FailsLateSpec:
    """Drift that cannot be estimated on more than 25 points: a later estimate that fails."""

    family: ClassVar[str] = "fails_late"
    summary: ClassVar[str] = "drift up to 25 points"

    def fit(self, y: pd.Series, seasonal_period: int = 1) -> object:
        if len(y) > 25:
            raise np.linalg.LinAlgError("singular matrix")
        return _SettlesOn(DriftSpec().fit(y, seasonal_period), self)


class _SettlesOn:
    """A fitted drift model whose settled structure is the given specification."""

    def __init__(self, inner: object, spec: object) -> None:
        self._inner, self._spec = inner, spec

    def __getattr__(self, name: str) -> object:
        return getattr(self._inner, name)

    def settled_specification(self) -> object:
        return self._spec


def test_a_failed_later_estimate_keeps_the_earlier_one() -> None:
    y = monthly(np.concatenate([np.arange(20.0), 20.0 + 5.0 * np.arange(1, 11)]))
    plan = plan_origins(len(y), horizon=2, origins=3, step=2)
    [model] = run(y, [FailsLateSpec()], 1, plan, (0.8,), refit_at=plan.origins[1:])
    [early] = run(y, [DriftSpec()], 1, plan, (0.8,))
    assert model.ok
    for got, want in zip(model.forecasts, early.forecasts, strict=True):
        np.testing.assert_allclose(got.point, want.point)


def test_failures_are_data_and_ranking_skips_them() -> None:
    rng = np.random.default_rng(3)
    y = monthly(50 + rng.normal(size=48).cumsum())
    specs = [BrokenSpec(), NaiveSpec(), SeasonalNaiveSpec(), DriftSpec()]
    report = backtest(y, specs, 12, horizon=6, origins=3, step=3)
    broken = report.models[0]
    assert not broken.ok and "LinAlgError" in (broken.failure or "")
    scores = [r.score for r in report.ranking]
    assert scores == sorted(scores)
    assert len(report.ranking) == 3
    text = json.dumps(backtest_body(report, []), allow_nan=False)
    assert '"msis"' in text and '"observed_coverage"' in text


def test_per_step_coverage_and_msis_are_reported_per_level() -> None:
    rng = np.random.default_rng(5)
    y = monthly(10 + rng.normal(size=60))
    report = backtest(y, [NaiveSpec()], horizon=4, origins=5, step=2, coverage=(0.95, 0.8))
    steps = report.models[0].steps()
    assert len(steps) == 4
    assert set(steps[0].coverage) == {0.8, 0.95}
    assert all(s.msis[0.95] >= 0 and 0 <= s.coverage[0.8] <= 1 for s in steps)
    assert report.coverage == (0.8, 0.95)


def test_map_fn_receives_every_candidate() -> None:
    seen: list[str] = []

    def spying_map(fn, tasks):  # type: ignore[no-untyped-def]
        seen.extend(t.specification.family for t in tasks)
        return [fn(t) for t in tasks]

    y = monthly(np.arange(30.0))
    backtest(y, [NaiveSpec(), DriftSpec()], horizon=3, origins=2, map_fn=spying_map)
    assert seen == ["naive", "drift"]


def test_unknown_metric_and_empty_specifications() -> None:
    y = monthly(np.arange(30.0))
    with pytest.raises(RequestError):
        backtest(y, [NaiveSpec()], horizon=3, metric="mape")
    with pytest.raises(RequestError) as info:
        backtest(y, [], horizon=3)
    assert info.value.problems[0].field == "models"


@pytest.mark.parametrize(
    "data",
    [
        {"family": "arima", "order": [0, 1, 1], "seasonal_order": [0, 1, 1]},
        {"family": "ets", "error": "add", "trend": "add", "damped": True, "season": "add"},
        {"family": "theta"},
        {"family": "stl", "base": {"family": "ets"}},
        {"family": "combination", "members": [{"family": "drift"}, {"family": "theta"}]},
    ],
)
@pytest.mark.parametrize("logged", [False, True])
def test_label_of_a_fit_is_what_its_description_says(data: dict[str, object], logged: bool) -> None:
    # The backtest names a fit by its own label where it keeps one (ARIMA's description would
    # filter the series to test the residuals); the name must be the description's.
    rng = np.random.default_rng(3)
    t = np.arange(72)
    y = monthly(50 + 0.3 * t + 5 * np.sin(2 * np.pi * t / 12) + rng.normal(0, 1, 72))
    spec = specification_from_dict(data)
    if logged:
        spec = TransformedSpec(spec, Transform("log"))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        fitted = spec.fit(y, 12)
        assert label_of(fitted) == fitted.describe().label


@pytest.mark.parametrize(
    "spec",
    [
        ArimaSpec(order=(1, 1, 1), seasonal_order=(0, 1, 1)),
        TransformedSpec(EtsSpec("add", "add", True, "add"), Transform("log")),
    ],
)
def test_first_origin_forecast_is_the_fit_s_own(spec: Specification) -> None:
    # A family forecasting every origin in one pass forecasts the first origin, where the
    # estimation ends, in that pass too: the numbers are the fitted model's own forecast.
    rng = np.random.default_rng(8)
    t = np.arange(96)
    y = monthly(80 + 0.4 * t + 6 * np.sin(2 * np.pi * t / 12) + rng.normal(0, 1, 96))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        report = backtest(y, [spec], 12, horizon=6, origins=3, step=6)
        first = report.models[0].forecasts[0]
        origin = int(y.index.get_loc(first.origin))
        own = spec.fit(y.iloc[:origin], 12).forecast(6, (0.8, 0.95))
    np.testing.assert_allclose(first.point, own.point, rtol=1e-12)
    np.testing.assert_allclose(first.upper[0.95], own.intervals[1].upper, rtol=1e-10)
