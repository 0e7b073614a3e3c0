"""Shapes shared by several endpoints: the series, problems and provenance."""

from __future__ import annotations

from typing import Annotated, Any, Literal

from pydantic import BaseModel, ConfigDict, Field, WithJsonSchema

NumberOrNullList = Annotated[
    list[Any],
    WithJsonSchema(
        {"type": "array", "items": {"anyOf": [{"type": "number"}, {"type": "null"}]}, "minItems": 1}
    ),
]
TimestampList = Annotated[
    list[Any],
    WithJsonSchema(
        {
            "type": "array",
            "items": {"type": "string", "format": "date-time"},
            "description": "ISO 8601 dates or date-times, strictly increasing.",
        }
    ),
]


class Strict(BaseModel):
    """Unknown fields and wrong JSON types are refused (no `true` or `"5"` read as 1 or 5)."""

    model_config = ConfigDict(extra="forbid", strict=True)


class AggregateIn(Strict):
    """Regularise to a coarser frequency before anything else."""

    frequency: str = Field(description="Target frequency (ISO 8601 duration or pandas alias).")
    method: Literal["sum", "mean", "last"] = Field("sum", description="How to combine values.")


class SeriesIn(Strict):
    """A time series: timestamps + values, or start + frequency + values."""

    values: NumberOrNullList = Field(description="Observations; null marks a missing value.")
    timestamps: TimestampList | None = Field(None, description="ISO 8601, one per value.")
    start: str | None = Field(None, description="First timestamp when timestamps are omitted.")
    frequency: str | None = Field(
        None,
        description="ISO 8601 duration (P1D, P1W, P1M, PT1H) or pandas alias "
        "(D, W-MON, MS, h); inferred from timestamps when absent.",
    )
    seasonal_period: int | None = Field(
        None, ge=1, description="Observations per seasonal cycle; default from the frequency."
    )
    name: str | None = Field(None, max_length=200, description="A label echoed back.")
    missing: Literal["interpolate", "keep", "error"] = Field(
        "interpolate", description="What to do with missing values."
    )
    aggregate: AggregateIn | None = None


class FieldError(BaseModel):
    """One offending field."""

    field: str
    message: str


class Problem(BaseModel):
    """An RFC 9457 problem document."""

    type: str
    title: str
    status: int
    detail: str
    instance: str
    code: str | None = None
    request_id: str | None = None
    errors: list[FieldError] = []


class Provenance(BaseModel):
    """Where an answer came from: data hash, cache result and versions."""

    data_hash: str
    cache: Literal["hit", "miss", "off"]
    service_version: str
    library_versions: dict[str, str]


class WarningOut(BaseModel):
    """A condition the caller should know about; the answer is still given."""

    code: str
    message: str
