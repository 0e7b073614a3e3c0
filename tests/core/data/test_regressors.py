"""The regressor wire form checked into aligned DataFrames, errors naming the item."""

from __future__ import annotations

import math

import pandas as pd
import pytest

from service.core.data.regressors import regressors_from_wire
from service.core.errors import RequestError

INDEX = pd.date_range("2025-01-06", periods=3, freq="W-MON")


def test_history_and_future_become_frames_on_the_right_indexes() -> None:
    found = regressors_from_wire(
        [{"name": "promotion", "history": [0, 1, 0], "future": [1, 1]}], INDEX, horizon=2
    )
    assert list(found.history.columns) == ["promotion"]
    assert found.history.index.equals(INDEX)
    assert found.future is not None
    assert found.future.index[0] == INDEX[-1] + INDEX.freq
    assert found.future["promotion"].tolist() == [1.0, 1.0]


@pytest.mark.parametrize(
    ("item", "field"),
    [
        ({"name": "a", "history": [0, 1, 0]}, "regressors[1].future"),
        ({"name": "a", "history": [0, 1], "future": [1, 1]}, "regressors[1].history"),
        ({"name": "a", "history": [0, 1, 0], "future": [1]}, "regressors[1].future"),
        ({"name": "a", "history": [0, 1, 0], "future": [1, math.inf]}, "regressors[1].future[1]"),
        ({"name": "x", "history": [0, 1, 0], "future": [1, 1]}, "regressors[1].name"),
        ({"name": "", "history": [0, 1, 0], "future": [1, 1]}, "regressors[1].name"),
    ],
)
def test_problems_name_the_item_and_part(item: dict[str, object], field: str) -> None:
    first = {"name": "x", "history": [1, 2, 3], "future": [4, 5]}
    with pytest.raises(RequestError) as caught:
        regressors_from_wire([first, item], INDEX, horizon=2)
    assert caught.value.problems[0].field == field


def test_without_a_horizon_future_is_not_required() -> None:
    found = regressors_from_wire([{"name": "a", "history": [1, 2, 3]}], INDEX)
    assert found.future is None
