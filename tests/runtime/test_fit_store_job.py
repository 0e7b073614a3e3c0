"""The fit store's job: the worker pickles the fitted bundle and loads a stored one, so that
the server keeps fitted models as bytes without importing the families' implementations."""

from __future__ import annotations

import pickle

import numpy as np
import pandas as pd

from service.core.models.ets.family import EtsSpec
from service.runtime import jobs


def _task(horizon: int) -> jobs.ForecastTask:
    rng = np.random.default_rng(3)
    y = pd.Series(
        50 + np.cumsum(rng.normal(0, 1, 40)),
        index=pd.date_range("2020-01-01", periods=40, freq="MS"),
    )
    spec = EtsSpec(error="add", trend="none", damped=False, season="none")
    return jobs.ForecastTask(
        y=y, seasonal_period=12, specification=spec, horizon=horizon, coverage=(0.8,)
    )


def test_a_fit_comes_back_pickled_and_serves_a_new_horizon() -> None:
    first, fresh = jobs.forecast_stored(None, _task(3))
    assert isinstance(fresh, bytes)
    assert isinstance(pickle.loads(fresh), jobs.FittedBundle)
    again, none = jobs.forecast_stored(fresh, _task(5))
    assert none is None  # the stored model answered: nothing new to store
    assert again.forecast.point[:3].tobytes() == first.forecast.point.tobytes()
    assert again.description.parameters == first.description.parameters


def test_a_stored_model_that_no_longer_loads_is_fitted_again() -> None:
    first, _ = jobs.forecast_stored(None, _task(3))
    # Authentic (its seal verified) but unusable, e.g. a class renamed since it was stored.
    again, fresh = jobs.forecast_stored(b"\x80\x05not a pickle", _task(3))
    assert isinstance(fresh, bytes)
    assert again.forecast.point.tobytes() == first.forecast.point.tobytes()
    other, fresh = jobs.forecast_stored(pickle.dumps({"not": "a bundle"}), _task(3))
    assert isinstance(fresh, bytes)
    assert other.forecast.point.tobytes() == first.forecast.point.tobytes()
