"""The catalogue of model families."""

from __future__ import annotations

from typing import Any

from fastapi import APIRouter

from service.api.schemas.models import CatalogueResponse
from service.core.data.periods import PERIODS_BY_STEP
from service.core.models.base import ParameterInfo
from service.core.models.registry import FamilyEntry, catalogue

router = APIRouter(prefix="/v1", tags=["models"])


def parameter_body(p: ParameterInfo) -> dict[str, Any]:
    """One parameter's entry; the constraints it does not have are left out."""
    item: dict[str, Any] = {
        "name": p.name,
        "kind": p.kind,
        "default": p.default,
        "description": p.description,
    }
    if p.allowed is not None:
        item["allowed"] = list(p.allowed)
    if p.minimum is not None:
        item["minimum"] = p.minimum
    if p.maximum is not None:
        item["maximum"] = p.maximum
    return item


def family_body(entry: FamilyEntry) -> dict[str, Any]:
    """One family's entry of the catalogue."""
    return {
        "family": entry.family,
        "summary": entry.summary,
        "parameters": [parameter_body(p) for p in entry.parameters],
        "constraints": list(entry.constraints),
    }


# One real entry of the catalogue (no statistics: the registry's field metadata).
CATALOGUE_EXAMPLE = {"families": [family_body(c) for c in catalogue() if c.family == "croston"]}


@router.get(
    "/models",
    summary="Model families and their parameters",
    response_model=CatalogueResponse,
    response_model_exclude_unset=True,
    responses={200: {"content": {"application/json": {"example": CATALOGUE_EXAMPLE}}}},
)
async def list_models() -> dict[str, Any]:
    """Every family Windvane can fit, with its parameters, defaults and constraints."""
    return {
        "families": [family_body(c) for c in catalogue()],
        "default_seasonal_periods": list(PERIODS_BY_STEP),
    }
