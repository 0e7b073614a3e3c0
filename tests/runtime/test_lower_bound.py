"""Non-negative histories give non-negative forecasts and bounds in every family; the request
sets or turns off the bound; Croston keeps its floor; interpolated gaps and periods too long
for the history are reported."""

from __future__ import annotations

from typing import Any

import numpy as np
import pytest

from service.api.schemas.forecasts import ForecastRequest
from service.api.tasks import forecast_task
from service.config import Settings
from service.core.models.registry import FAMILIES
from service.runtime import jobs
from tests.multi_period_series import hourly_counts

EXAMPLES: dict[str, dict[str, Any]] = {
    "combination": {"family": "combination", "members": [{"family": "naive"}, {"family": "drift"}]},
}


def _task(values: list[float | None], model: Any = "auto", **extra: Any) -> jobs.ForecastTask:
    body = ForecastRequest.model_validate(
        {
            "series": {"start": "2026-01-05T00:00:00", "frequency": "h", "values": values},
            "horizon": 48,
            "model": model,
            **extra,
        }
    )
    return forecast_task(body, Settings(api_keys=""))[0]


def _low_counts() -> list[float | None]:
    # Counts near zero with weekly and daily cycles: Gaussian intervals reach below zero.
    y = hourly_counts(weeks=3) / 10.0
    return [float(round(v)) for v in y.to_numpy()]


@pytest.mark.parametrize("family", sorted(FAMILIES))
def test_no_negative_bound_for_a_non_negative_series_in_any_family(family: str) -> None:
    answer = jobs.forecast(_task(_low_counts(), EXAMPLES.get(family, {"family": family})))
    assert np.all(answer.forecast.point >= 0)
    for interval in answer.forecast.intervals:
        assert np.all(interval.lower >= 0)
    assert answer.lower_bound is not None and answer.lower_bound.value == 0.0


def test_the_request_turns_the_bound_off_or_sets_it() -> None:
    off = jobs.forecast(_task(_low_counts(), {"family": "naive"}, lower_bound=None))
    assert off.lower_bound is None
    assert np.any(off.forecast.intervals[-1].lower < 0)
    raised = jobs.forecast(_task(_low_counts(), {"family": "naive"}, lower_bound=1.5))
    assert raised.lower_bound is not None and raised.lower_bound.raised > 0
    assert np.all(raised.forecast.intervals[-1].lower >= 1.5)


def test_croston_keeps_its_floor_when_the_bound_is_turned_off() -> None:
    values = [0.0, 0.0, 3.0, 0.0, 0.0, 0.0, 5.0, 0.0] * 12
    answer = jobs.forecast(_task(values, {"family": "croston"}, lower_bound=None))
    assert answer.lower_bound is not None and answer.lower_bound.value == 0.0
    assert np.all(answer.forecast.intervals[-1].lower >= 0)


def test_a_forecast_from_interpolated_gaps_says_so() -> None:
    values = _low_counts()
    values[10] = values[11] = None
    answer = jobs.forecast(_task(values, {"family": "naive"}))
    found = [w for w in answer.warnings if w.code == "interpolated"]
    assert found and "2 missing value(s)" in found[0].message


def test_a_period_too_long_for_the_history_is_reported_left_out() -> None:
    body = ForecastRequest.model_validate(
        {
            "series": {
                "start": "2026-01-05T00:00:00",
                "frequency": "h",
                "values": _low_counts(),
                "seasonal_period": [24, 1000],
            },
            "horizon": 24,
            "model": {"family": "naive"},
        }
    )
    task, _ = forecast_task(body, Settings(api_keys=""))
    answer = jobs.forecast(task)
    found = [w for w in answer.warnings if w.code == "period_left_out"]
    assert len(found) == 1 and "seasonal period 1000 was left out" in found[0].message
    assert "2000 points needed" in found[0].message
