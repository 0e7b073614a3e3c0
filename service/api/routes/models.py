"""The catalogue of model families."""

from __future__ import annotations

from typing import Any

from fastapi import APIRouter

from service.api.schemas.models import CatalogueResponse
from service.core.data.periods import PERIODS_BY_STEP
from service.core.models.registry import catalogue

router = APIRouter(prefix="/v1", tags=["models"])


# One real entry of the catalogue (no statistics: the registry's field metadata).
CATALOGUE_EXAMPLE = {"families": [c for c in catalogue() if c["family"] == "croston"]}


@router.get(
    "/models",
    summary="Model families and their parameters",
    response_model=CatalogueResponse,
    response_model_exclude_unset=True,
    responses={200: {"content": {"application/json": {"example": CATALOGUE_EXAMPLE}}}},
)
async def list_models() -> dict[str, Any]:
    """Every family Windvane can fit, with its parameters, defaults and constraints."""
    return {"families": catalogue(), "default_seasonal_periods": list(PERIODS_BY_STEP)}
