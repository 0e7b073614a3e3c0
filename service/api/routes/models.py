"""The catalogue of model families."""

from __future__ import annotations

from typing import Any

from fastapi import APIRouter

from service.core.models.registry import catalogue

router = APIRouter(prefix="/v1", tags=["models"])


@router.get("/models", summary="Model families and their parameters")
async def list_models() -> dict[str, Any]:
    """Every family Windvane can fit, with its parameters, defaults and constraints."""
    return {"families": catalogue()}
