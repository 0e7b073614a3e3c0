"""External regressors: the wire form (named lists) checked into aligned DataFrames.

The request carries ``"regressors": [{"name": "promotion", "history": [...], "future": [...]}]``;
history aligns with the series, future with the forecast horizon. Errors name the item,
``regressors[0].future``, so the API only forwards what it received.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd

from service.core.data.grid import future_index
from service.core.errors import RequestError


@dataclass(frozen=True)
class RegressorSet:
    """History aligned to the series and, when a horizon is known, the future values."""

    history: pd.DataFrame
    future: pd.DataFrame | None


def regressors_from_wire(
    items: Sequence[Mapping[str, Any]],
    index: pd.DatetimeIndex,
    horizon: int | None = None,
    field: str = "regressors",
) -> RegressorSet:
    """Check the wire form and build the history (and future, given a horizon) DataFrames."""
    if not isinstance(items, Sequence) or isinstance(items, (str, bytes)):
        raise RequestError("regressors must be a list of objects", field=field)
    names: list[str] = []
    history: dict[str, np.ndarray] = {}
    future: dict[str, np.ndarray] = {}
    for i, item in enumerate(items):
        where = f"{field}[{i}]"
        if not isinstance(item, Mapping):
            raise RequestError("a regressor must be an object with name and history", field=where)
        name = item.get("name")
        if not isinstance(name, str) or not name.strip():
            raise RequestError("a regressor needs a non-empty name", field=f"{where}.name")
        if name in names:
            raise RequestError(f"regressor name {name!r} is repeated", field=f"{where}.name")
        names.append(name)
        history[name] = _finite_list(item.get("history"), len(index), f"{where}.history")
        if horizon is not None:
            future[name] = _finite_list(item.get("future"), horizon, f"{where}.future")
    frame = pd.DataFrame(history, index=index, columns=names)
    ahead = None
    if horizon is not None:
        ahead = pd.DataFrame(future, index=future_index(index, horizon), columns=names)
    return RegressorSet(frame, ahead)


def aligned_history(
    regressors: pd.DataFrame, index: pd.DatetimeIndex, field: str = "regressors"
) -> np.ndarray:
    """The regressors' values as a float matrix, after checking they align with the series."""
    if not isinstance(regressors, pd.DataFrame):
        raise RequestError("regressors must be a table with one column per regressor", field=field)
    if len(regressors) != len(index) or not regressors.index.equals(index):
        raise RequestError(
            f"regressor history must have the series' {len(index)} timestamps, "
            f"got {len(regressors)} rows that do not match",
            field=f"{field}[0].history",
        )
    values = regressors.to_numpy(dtype=float)
    _check_finite(values, f"{field}", "history")
    return values


def aligned_future(
    future: pd.DataFrame | np.ndarray | None,
    columns: Sequence[str],
    horizon: int,
    field: str = "regressors",
) -> np.ndarray:
    """Future regressor values for ``horizon`` steps, one column per fitted regressor."""
    if future is None:
        raise RequestError(
            f"the model was fitted with regressors {', '.join(columns)}: their future values "
            f"for the {horizon} forecast steps are required",
            field=f"{field}[0].future",
        )
    if isinstance(future, pd.DataFrame):
        missing = [c for c in columns if c not in future.columns]
        if missing:
            i = list(columns).index(missing[0])
            raise RequestError(
                f"future values of regressor {missing[0]!r} are missing",
                field=f"{field}[{i}].future",
            )
        values = future[list(columns)].to_numpy(dtype=float)
    else:
        values = np.asarray(future, dtype=float).reshape(-1, len(columns))
    if values.shape[0] != horizon:
        raise RequestError(
            f"regressor future values must cover the horizon of {horizon} steps, "
            f"got {values.shape[0]}",
            field=f"{field}[0].future",
        )
    _check_finite(values, field, "future")
    return values


def _finite_list(value: Any, length: int, where: str) -> np.ndarray:
    if not isinstance(value, Sequence) or isinstance(value, (str, bytes)):
        raise RequestError(f"expected a list of {length} numbers", field=where)
    if len(value) != length:
        raise RequestError(f"expected {length} values, got {len(value)}", field=where)
    out = np.empty(length)
    for j, v in enumerate(value):
        if isinstance(v, bool) or not isinstance(v, (int, float)) or not np.isfinite(v):
            raise RequestError(f"must be a finite number, got {v!r}", field=f"{where}[{j}]")
        out[j] = float(v)
    return out


def _check_finite(values: np.ndarray, field: str, part: str) -> None:
    bad = np.argwhere(~np.isfinite(values))
    if bad.size:
        row, column = (int(v) for v in bad[0])
        raise RequestError(
            f"regressor {part} values must be finite", field=f"{field}[{column}].{part}[{row}]"
        )
