"""Variance-stabilising transforms (none, log, Box-Cox) around any model specification.

The model is fitted on the transformed scale. Interval bounds are back-transformed as
quantiles (the transform is monotone). The point is back-transformed either as the
median (plain inverse) or, by default, as the bias-adjusted mean of FPP3 §5.6:
    y = inverse(w) · [1 + σ²_h (1 − λ) / (2 (λw + 1)²)]   (λ ≠ 0)
    y = exp(w) · (1 + σ²_h / 2)                             (λ = 0)
with σ²_h the h-step forecast variance on the transformed scale, read from the model's
80 % interval as ((upper − lower) / (2 z₀.₉))².
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field, replace
from typing import Any, ClassVar, cast

import numpy as np
import pandas as pd

from service.core.errors import FitError, SpecificationError
from service.core.models.base import (
    Description,
    Fitted,
    FitWarning,
    Forecast,
    as_dict,
    origin_forecasts,
    residuals_from,
)
from service.core.models.intervals import Interval, normal_quantile
from service.core.models.labels import model_label

KINDS = ("none", "log", "boxcox")
BACK_TRANSFORMS = ("mean", "median")
_VARIANCE_LEVEL = 0.8


@dataclass(frozen=True)
class Transform:
    """A transform: kind, a fixed Box-Cox exponent (None to estimate it by maximum
    likelihood) and how the point comes back to the original scale (mean or median)."""

    kind: str = "none"
    power: float | None = None
    back_transform: str = "mean"

    def __post_init__(self) -> None:
        if self.kind not in KINDS:
            raise SpecificationError(
                f"transform must be one of {', '.join(KINDS)}; got {self.kind!r}",
                field="transform",
            )
        if self.power is not None and not math.isfinite(self.power):
            raise SpecificationError("power must be a finite number", field="transform.power")
        if self.back_transform not in BACK_TRANSFORMS:
            raise SpecificationError(
                f"back_transform must be mean or median; got {self.back_transform!r}",
                field="transform.back_transform",
            )


def transform_from_value(value: Any, field: str = "transform") -> Transform:
    """Parse the request's ``transform``: a kind name, or {"kind", "power", "back_transform"}."""
    if value is None:
        return Transform()
    if isinstance(value, str):
        _check_kind(value, field)
        return Transform(value)
    if not isinstance(value, Mapping):
        raise SpecificationError("transform must be a name or an object", field=field)
    unknown = set(value) - {"kind", "power", "back_transform"}
    if unknown:
        raise SpecificationError(
            f"unknown transform option {sorted(unknown)[0]!r}; allowed: kind, power, "
            "back_transform",
            field=f"{field}.{sorted(unknown)[0]}",
        )
    kind = value.get("kind", "none")
    _check_kind(kind, f"{field}.kind")
    power = value.get("power")
    if power is not None and (isinstance(power, bool) or not isinstance(power, (int, float))):
        raise SpecificationError("power must be a number", field=f"{field}.power")
    back = value.get("back_transform", "mean")
    if back not in BACK_TRANSFORMS:
        raise SpecificationError(
            "back_transform must be mean or median", field=f"{field}.back_transform"
        )
    return Transform(kind, None if power is None else float(power), back)


def _check_kind(kind: Any, field: str) -> None:
    if kind not in KINDS:
        raise SpecificationError(
            f"transform must be one of {', '.join(KINDS)}; got {kind!r}", field=field
        )


def boxcox(values: np.ndarray, lam: float) -> np.ndarray:
    """(y^λ − 1)/λ, or log y when λ = 0."""
    return np.log(values) if lam == 0.0 else (np.power(values, lam) - 1.0) / lam


def inverse_boxcox(values: np.ndarray, lam: float) -> np.ndarray:
    """The inverse transform; beyond the range of the transform it returns 0 or +inf."""
    w = np.asarray(values, dtype=float)
    if lam == 0.0:
        return np.exp(w)
    base = lam * w + 1.0
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        out = np.power(np.maximum(base, 0.0), 1.0 / lam)
    if lam < 0:
        out = np.where(base <= 0.0, np.inf, out)
    return out


def boxcox_lambda(values: np.ndarray) -> float:
    """λ by maximum likelihood for an i.i.d. normal model (scipy, method='mle': trap 5)."""
    from scipy import stats

    return float(stats.boxcox_normmax(values, method="mle"))


def resolve_lambda(transform: Transform, values: np.ndarray) -> float | None:
    """The λ to use: None for no transform, 0 for log, given or estimated for Box-Cox."""
    if transform.kind == "none":
        return None
    if not np.all(np.isfinite(values)) or np.any(values <= 0):
        raise FitError(
            f"the {transform.kind} transform needs strictly positive, complete data",
            field="transform",
        )
    if transform.kind == "log":
        return 0.0
    if transform.power is not None:
        return transform.power
    try:
        # A constant series of tiny values left scipy without a bracket: a 500 until caught.
        return boxcox_lambda(values)
    except (ArithmeticError, RuntimeError, ValueError) as exc:
        raise FitError(
            f"the Box-Cox power could not be estimated for this series ({type(exc).__name__}); "
            "give transform.power",
            field="transform",
        ) from exc


@dataclass(frozen=True)
class TransformedSpec:
    """A base specification fitted on the transformed series."""

    family: ClassVar[str] = "transformed"
    summary: ClassVar[str] = "A model fitted on the log or Box-Cox scale."

    base: Any
    transform: Transform = field(default_factory=Transform)

    def fit(self, y: pd.Series, seasonal_period: int = 1) -> Fitted:
        """Fit the base on the transformed scale (or directly, for the 'none' transform)."""
        return fit_transformed(self.base, y, seasonal_period, self.transform)

    def json_form(self) -> dict[str, Any]:
        """The base's JSON with the transform beside it, as a request would write them."""
        t = self.transform
        return {
            **as_dict(self.base),
            "transform": {"kind": t.kind, "power": t.power, "back_transform": t.back_transform},
        }


def fit_transformed(spec: Any, y: pd.Series, seasonal_period: int, transform: Transform) -> Fitted:
    """Fit ``spec`` on ``transform(y)``; forecasts come back on the original scale."""
    values = y.to_numpy(dtype=float)
    lam = resolve_lambda(transform, values)
    if lam is None:
        return cast(Fitted, spec.fit(y, seasonal_period))
    z = pd.Series(boxcox(values, lam), index=y.index, name=y.name)
    inner = spec.fit(z, seasonal_period)
    fitted = TransformedFitted(
        TransformedSpec(spec, transform), y, lam, inner, list(inner.warnings)
    )
    return cast(Fitted, fitted)


@dataclass
class TransformedFitted:
    """A model fitted on the transformed scale, back-transformed on the way out."""

    specification: TransformedSpec
    y: pd.Series
    lam: float
    inner: Fitted
    warnings: list[FitWarning] = field(default_factory=list)

    def forecast(self, horizon: int, coverage: Sequence[float]) -> Forecast:
        """Back-transformed quantiles; point = bias-adjusted mean or median (see module)."""
        return self._back(self.inner.forecast(horizon, _asked(coverage)), coverage)

    def origin_forecasts(
        self, y: pd.Series, origins: Sequence[int], horizon: int, coverage: Sequence[float]
    ) -> list[Forecast]:
        """``refilter(y.iloc[:o]).forecast(horizon, coverage)`` for every origin ``o``: the
        transform works point by point, so the inner model forecasts from the transformed
        longest history (``origin_forecasts``, one pass where the inner family has it)."""
        longest = self.refilter(y.iloc[: max(origins)])
        inner = origin_forecasts(self.inner, longest.inner_y(), origins, horizon, _asked(coverage))
        return [self._back(f, coverage) for f in inner]

    def inner_y(self) -> pd.Series:
        """The transformed history the inner model was fitted or re-filtered on."""
        values = self.y.to_numpy(dtype=float)
        return pd.Series(boxcox(values, self.lam), index=self.y.index, name=self.y.name)

    def _back(self, inner: Forecast, coverage: Sequence[float]) -> Forecast:
        """An inner forecast (with the variance level among its intervals) on the data scale."""
        levels = tuple(coverage)
        by_level = {i.coverage: i for i in inner.intervals}
        w = inner.point
        point = inverse_boxcox(w, self.lam)
        if self.specification.transform.back_transform == "mean":
            band = by_level[_VARIANCE_LEVEL]
            var = ((band.upper - band.lower) / (2.0 * normal_quantile(_VARIANCE_LEVEL))) ** 2
            point = point * bias_factor(w, var, self.lam)
        intervals = tuple(
            Interval(
                c,
                inverse_boxcox(by_level[c].lower, self.lam),
                inverse_boxcox(by_level[c].upper, self.lam),
            )
            for c in (float(level) for level in levels)
        )
        return Forecast(inner.index, point, intervals)

    def fitted_values(self) -> pd.Series:
        """In-sample fits back-transformed as medians."""
        fitted = inverse_boxcox(self.inner.fitted_values().to_numpy(dtype=float), self.lam)
        return pd.Series(fitted, index=self.y.index, name="fitted")

    def residuals(self) -> pd.Series:
        """Observed minus back-transformed fit, on the original scale."""
        return residuals_from(self.y, self.fitted_values())

    def settled_specification(self) -> TransformedSpec | None:
        """The inner model's settled form for another history, on the same scale; None when
        the inner model offers none."""
        settled = getattr(self.inner, "settled_specification", None)
        inner = settled() if callable(settled) else None
        return None if inner is None else TransformedSpec(inner, self.specification.transform)

    def refilter(self, y: pd.Series) -> TransformedFitted:
        """The same λ and inner parameters on another history."""
        values = y.to_numpy(dtype=float)
        if np.any(values <= 0):
            raise FitError("the transform needs strictly positive data", field="transform")
        z = pd.Series(boxcox(values, self.lam), index=y.index, name=y.name)
        return TransformedFitted(self.specification, y, self.lam, self.inner.refilter(z), [])

    @property
    def label(self) -> str | None:
        """The inner model's label with the scale, where the inner model keeps one."""
        inner = getattr(self.inner, "label", None)
        return model_label("transformed", base=inner, power=self.lam) if inner else None

    def describe(self) -> Description:
        """The inner description with the scale in the label and the exponent among the
        parameters."""
        d = self.inner.describe()
        return Description(
            family=d.family,
            label=model_label("transformed", base=d.label, power=self.lam),
            specification={**d.specification, "transform": as_transform_dict(self)},
            parameters={**d.parameters, "box_cox_power": self.lam},
            information_criteria=d.information_criteria,
            residual_variance=d.residual_variance,
            residual_diagnostics=replace(d.residual_diagnostics, scale="transformed"),
            observations=d.observations,
            fit_seconds=d.fit_seconds,
        )


def _asked(coverage: Sequence[float]) -> tuple[float, ...]:
    """The levels asked of the inner model: the requested ones and the variance level."""
    levels = tuple(coverage)
    return levels if _VARIANCE_LEVEL in levels else (*levels, _VARIANCE_LEVEL)


def as_transform_dict(fitted: TransformedFitted) -> dict[str, Any]:
    """The transform as JSON, with the exponent actually used."""
    t = fitted.specification.transform
    return {"kind": t.kind, "power": fitted.lam, "back_transform": t.back_transform}


def bias_factor(w: np.ndarray, variance: np.ndarray, lam: float) -> np.ndarray:
    """FPP3 §5.6 multiplier turning the back-transformed median into the mean."""
    if lam == 0.0:
        return 1.0 + variance / 2.0
    return 1.0 + variance * (1.0 - lam) / (2.0 * (lam * w + 1.0) ** 2)
