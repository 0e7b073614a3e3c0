"""GET /v1/models: the catalogue of model families."""

from __future__ import annotations

from typing import Any

from pydantic import Field

from service.api.schemas.common import Out, Sparse


class ParameterOut(Sparse):
    """One hyperparameter of a family: its kind, default and constraints."""

    name: str
    kind: str = Field(
        description="boolean, integer, number, choice, integers, numbers, "
        "specification or specifications."
    )
    default: Any = Field(description="The value used when the parameter is left out.")
    description: str
    allowed: list[str] | None = None
    minimum: float | None = None
    maximum: float | None = None


class FamilyOut(Out):
    """A model family with its parameters and constraints in plain sentences."""

    family: str
    summary: str
    parameters: list[ParameterOut]
    constraints: list[str]


class PeriodsByStepOut(Out):
    """The seasonal periods a series gets when it states none, by its step."""

    step: str
    periods: list[float | str] = Field(description="A number, or a formula in the step's n.")
    cycles: str


class CatalogueResponse(Out):
    """Every family Windvane can fit, and the default seasonal periods by step."""

    families: list[FamilyOut]
    default_seasonal_periods: list[PeriodsByStepOut] = Field(
        default_factory=list,
        description="Used when series.seasonal_period is absent; each period only when the "
        "history holds at least two full cycles of it.",
    )
