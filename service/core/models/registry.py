"""The families Windvane knows: specifications from JSON, and the catalogue of parameters.

A family registers by being listed in ``_FAMILY_CLASSES``; its hyperparameters are the
dataclass fields declared with ``models.base.parameter`` and are checked here from their
metadata (kind, allowed values, bounds), so no family writes its own JSON validation.
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Mapping
from typing import Any

from service.core.errors import FieldProblem, SpecificationError
from service.core.models.arima.family import ArimaSpec
from service.core.models.base import ParameterInfo, Specification
from service.core.models.combination import CombinationSpec
from service.core.models.croston import CrostonSpec
from service.core.models.drift import DriftSpec
from service.core.models.ets.family import EtsSpec
from service.core.models.harmonic.family import HarmonicSpec
from service.core.models.mean import MeanSpec
from service.core.models.mstl import MstlSpec
from service.core.models.naive import NaiveSpec
from service.core.models.seasonal_naive import SeasonalNaiveSpec
from service.core.models.stl import StlSpec
from service.core.models.theta import ThetaSpec

_FAMILY_CLASSES: tuple[type[Any], ...] = (
    MeanSpec,
    NaiveSpec,
    SeasonalNaiveSpec,
    DriftSpec,
    EtsSpec,
    ThetaSpec,
    CrostonSpec,
    CombinationSpec,
    ArimaSpec,
    StlSpec,
    MstlSpec,
    HarmonicSpec,
)

FAMILIES: dict[str, type[Any]] = {cls.family: cls for cls in _FAMILY_CLASSES}


def parameters_of(cls: type[Any]) -> list[ParameterInfo]:
    """The catalogue entries of one family's hyperparameters, in declaration order."""
    out = []
    for f in dataclasses.fields(cls):
        meta = f.metadata.get("windvane", {})
        default = f.default if f.default is not dataclasses.MISSING else None
        if f.default_factory is not dataclasses.MISSING:
            default = f.default_factory()
        out.append(
            ParameterInfo(
                name=f.name,
                kind=meta.get("kind") or _kind_of(default),
                default=_plain(default),
                description=meta.get("description", ""),
                allowed=meta.get("allowed"),
                minimum=meta.get("minimum"),
                maximum=meta.get("maximum"),
            )
        )
    return out


@dataclasses.dataclass(frozen=True)
class FamilyEntry:
    """One family of the catalogue: its summary, hyperparameters and constraints."""

    family: str
    summary: str
    parameters: tuple[ParameterInfo, ...]
    constraints: tuple[str, ...]


def catalogue() -> tuple[FamilyEntry, ...]:
    """Every family with its summary, parameters, defaults and constraints (GET /v1/models)."""
    return tuple(
        FamilyEntry(
            name,
            cls.summary,
            tuple(parameters_of(cls)),
            tuple(getattr(cls, "constraints", ())),
        )
        for name, cls in FAMILIES.items()
    )


def specification_from_dict(data: Any, field: str = "model") -> Specification:
    """Build a specification from its JSON form, naming the field of anything unknown or bad."""
    if not isinstance(data, Mapping):
        raise SpecificationError(
            "a model specification must be an object with a 'family'", field=field
        )
    family = data.get("family")
    if not isinstance(family, str) or family not in FAMILIES:
        allowed = ", ".join(sorted(FAMILIES))
        raise SpecificationError(
            f"unknown family {family!r}; allowed: {allowed}", field=f"{field}.family"
        )
    cls = FAMILIES[family]
    known = {p.name: p for p in parameters_of(cls)}
    renamed: Mapping[str, str] = getattr(cls, "renamed", {})
    problems = [
        FieldProblem(
            f"{field}.{key}",
            f"{key!r} is not a parameter; use {field}.{renamed[key]}"
            if key in renamed
            else f"unknown parameter {key!r} for family {family!r}; allowed: "
            f"{', '.join(known) or 'none'}",
        )
        for key in data
        if key != "family" and key not in known
    ]
    if problems:
        raise SpecificationError(problems[0].message, problems=problems)
    kwargs = {}
    for key, value in data.items():
        if key == "family":
            continue
        kwargs[key] = _coerce(known[key], value, f"{field}.{key}")
    try:
        return cls(**kwargs)
    except SpecificationError as exc:
        raise exc.moved_under(field) from exc
    except (TypeError, ValueError) as exc:
        raise SpecificationError(str(exc), field=field) from exc


def _coerce(p: ParameterInfo, value: Any, where: str) -> Any:
    """Check one parameter value against its catalogue entry and convert lists to tuples."""
    if value is None:
        if p.default is None:
            return None
        raise SpecificationError(f"{p.name} may not be null", field=where)
    kind = p.kind
    if kind == "specification":
        return specification_from_dict(value, where)
    if kind == "specifications":
        if not isinstance(value, list) or not value:
            raise SpecificationError(
                f"{p.name} must be a non-empty list of specifications", field=where
            )
        return tuple(specification_from_dict(v, f"{where}[{i}]") for i, v in enumerate(value))
    if kind == "boolean":
        if not isinstance(value, bool):
            raise SpecificationError(f"{p.name} must be true or false", field=where)
        return value
    if kind in ("integer", "number"):
        ok = isinstance(value, int) if kind == "integer" else isinstance(value, (int, float))
        if isinstance(value, bool) or not ok or not math.isfinite(value):
            raise SpecificationError(f"{p.name} must be a finite {kind}", field=where)
        _check_bounds(p, value, where)
        return value
    if kind == "choice":
        if p.allowed is not None and value not in p.allowed:
            raise SpecificationError(
                f"{p.name} must be one of {', '.join(map(str, p.allowed))}; got {value!r}",
                field=where,
            )
        return value
    if kind == "numbers":
        if not isinstance(value, list) or not all(
            isinstance(v, (int, float)) and not isinstance(v, bool) and math.isfinite(v)
            for v in value
        ):
            raise SpecificationError(f"{p.name} must be a list of finite numbers", field=where)
        for i, v in enumerate(value):
            _check_bounds(p, v, f"{where}[{i}]")
        return tuple(float(v) for v in value)
    if kind == "integers":
        if not isinstance(value, list) or not all(
            isinstance(v, int) and not isinstance(v, bool) for v in value
        ):
            raise SpecificationError(f"{p.name} must be a list of whole numbers", field=where)
        for i, v in enumerate(value):
            _check_bounds(p, v, f"{where}[{i}]")
        return tuple(value)
    return value


def _check_bounds(p: ParameterInfo, value: float, where: str) -> None:
    if p.minimum is not None and value < p.minimum:
        raise SpecificationError(f"{p.name} must be >= {p.minimum}; got {value}", field=where)
    if p.maximum is not None and value > p.maximum:
        raise SpecificationError(f"{p.name} must be <= {p.maximum}; got {value}", field=where)


def _kind_of(default: Any) -> str:
    if isinstance(default, bool):
        return "boolean"
    if isinstance(default, int):
        return "integer"
    if isinstance(default, float):
        return "number"
    return "choice"


def _plain(value: Any) -> Any:
    if dataclasses.is_dataclass(value) and not isinstance(value, type):
        from service.core.models.base import as_dict

        return as_dict(value)
    if isinstance(value, tuple):
        return [_plain(v) for v in value]
    return value


def with_series_periods(spec: Any, periods: tuple[float, ...]) -> Any:
    """The specification with every ``periods`` left null (its own or a nested model's) set to
    the series' periods, so that the fitted model, its cache key and its response name them."""
    if not dataclasses.is_dataclass(spec) or isinstance(spec, type):
        return spec
    changes: dict[str, Any] = {}
    for f in dataclasses.fields(spec):
        value = getattr(spec, f.name)
        if f.name == "periods" and value is None and periods:
            changes[f.name] = tuple(periods)
        elif dataclasses.is_dataclass(value) and not isinstance(value, type):
            inner = with_series_periods(value, periods)
            if inner is not value:
                changes[f.name] = inner
        elif isinstance(value, tuple) and any(dataclasses.is_dataclass(v) for v in value):
            members = tuple(with_series_periods(v, periods) for v in value)
            if any(a is not b for a, b in zip(members, value, strict=True)):
                changes[f.name] = members
    return dataclasses.replace(spec, **changes) if changes else spec
