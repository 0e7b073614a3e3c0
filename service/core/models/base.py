"""The one shape every model family has.

A *specification* is a frozen dataclass of hyperparameters; ``spec.fit(y, seasonal_period)``
returns a *fitted model* that forecasts, describes itself and can be re-filtered on another
history with its parameters held fixed (cheap rolling-origin evaluation).
"""

from __future__ import annotations

import dataclasses
from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any, ClassVar, Protocol, cast, runtime_checkable

import numpy as np
import pandas as pd

from service.core.diagnostics.autocorrelation import LjungBox
from service.core.models.intervals import Interval


@dataclass(frozen=True)
class FitWarning:
    """A warning raised while fitting (library warnings are data, returned to the caller)."""

    code: str
    message: str


@dataclass(frozen=True)
class Forecast:
    """Point path and one interval per coverage level, on the original scale."""

    index: pd.DatetimeIndex
    point: np.ndarray
    intervals: tuple[Interval, ...]


@dataclass(frozen=True)
class ResidualChecks:
    """The residual Ljung-Box test (or why it was not run) and notes on how intervals are made.

    Fields left None are not part of the answer, except ``ljung_box``, always reported."""

    ljung_box: LjungBox | None
    reason: str | None = None
    members: tuple[str, ...] | None = None
    """A combination's member labels."""
    interval_method: str | None = None
    initial_states: str | None = None
    scale: str | None = None
    """``"transformed"`` when the checks ran on a transformed scale."""


@dataclass(frozen=True)
class Description:
    """What a fitted model is: its label, estimated parameters and fit statistics."""

    family: str
    label: str
    specification: dict[str, Any]
    parameters: dict[str, float]
    information_criteria: dict[str, float]
    residual_variance: float | None
    residual_diagnostics: ResidualChecks
    observations: int
    fit_seconds: float


@dataclass(frozen=True)
class ParameterInfo:
    """One entry of the model catalogue: a parameter, its default and its constraints."""

    name: str
    kind: str
    default: Any
    description: str
    allowed: tuple[Any, ...] | None = None
    minimum: float | None = None
    maximum: float | None = None


def parameter(
    default: Any,
    description: str,
    *,
    kind: str | None = None,
    allowed: Sequence[Any] | None = None,
    minimum: float | None = None,
    maximum: float | None = None,
) -> Any:
    """A dataclass field carrying its catalogue entry in the field metadata."""
    info = {
        "description": description,
        "kind": kind,
        "allowed": tuple(allowed) if allowed is not None else None,
        "minimum": minimum,
        "maximum": maximum,
    }
    return field(default=default, metadata={"windvane": info})


@runtime_checkable
class Fitted(Protocol):
    """A fitted model: forecasts, describes itself and re-filters on another history."""

    specification: Specification
    warnings: list[FitWarning]

    def forecast(self, horizon: int, coverage: Sequence[float]) -> Forecast: ...

    def describe(self) -> Description: ...

    def refilter(self, y: pd.Series) -> Fitted: ...

    def fitted_values(self) -> pd.Series: ...

    def residuals(self) -> pd.Series: ...


class Specification(Protocol):
    """Hyperparameters of one model family; hashable and JSON-serialisable."""

    family: ClassVar[str]
    summary: ClassVar[str]

    def fit(self, y: pd.Series, seasonal_period: int = 1) -> Fitted: ...


def family_of(spec: Any) -> str:
    """The model family behind a specification, looking through a transform around it."""
    if spec.family == "transformed":
        return family_of(spec.base)
    return str(spec.family)


def as_dict(spec: Any) -> dict[str, Any]:
    """The JSON form of a specification: its family and every hyperparameter, nested.

    A wrapper that is not a family of its own (a transform around a model) gives its own
    ``json_form``."""
    own = getattr(spec, "json_form", None)
    if callable(own):
        return dict(own())
    out: dict[str, Any] = {"family": spec.family}
    for f in dataclasses.fields(spec):
        value = getattr(spec, f.name)
        out[f.name] = _jsonable(value)
    return out


def _jsonable(value: Any) -> Any:
    if dataclasses.is_dataclass(value) and not isinstance(value, type):
        if hasattr(value, "family"):
            return as_dict(value)
        return {f.name: _jsonable(getattr(value, f.name)) for f in dataclasses.fields(value)}
    if isinstance(value, tuple):
        return [_jsonable(v) for v in value]
    return value


def origin_forecasts(
    fitted: Fitted, y: pd.Series, origins: Sequence[int], horizon: int, coverage: Sequence[float]
) -> list[Forecast]:
    """Forecasts from several origins of ``y`` with ``fitted``'s parameters held fixed:
    ``fitted.refilter(y.iloc[:o]).forecast(horizon, coverage)`` for each origin ``o``, or the
    family's own ``origin_forecasts``, which gives the same from fewer passes over ``y``."""
    own = getattr(fitted, "origin_forecasts", None)
    if callable(own) and origins:
        return cast(list[Forecast], own(y, origins, horizon, coverage))
    return [fitted.refilter(y.iloc[:origin]).forecast(horizon, coverage) for origin in origins]


def residuals_from(y: pd.Series, fitted: pd.Series) -> pd.Series:
    """Observed minus fitted on the series' index (the residuals every family reports)."""
    return pd.Series(
        y.to_numpy(dtype=float) - fitted.to_numpy(dtype=float), index=y.index, name="residuals"
    )
