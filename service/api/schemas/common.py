"""Shapes shared by several endpoints: the series, problems and provenance."""

from __future__ import annotations

from typing import Annotated, Any, Literal

from pydantic import (
    AfterValidator,
    BaseModel,
    BeforeValidator,
    ConfigDict,
    Field,
    SerializerFunctionWrapHandler,
    WithJsonSchema,
    model_serializer,
)

from service.core.data.periods import MAX_PERIOD, MAX_PERIODS
from service.core.data.series import VALUE_MAGNITUDE
from service.core.data.timestamps import TIMESTAMP_CHARACTERS

# Bounds stated here or imported from the core are checked by the core (which names the
# index) or by pydantic, and appear in the OpenAPI schema; the limits that come from the
# settings are added to the schema by service.api.document.install_limits.
FREQUENCY_CHARACTERS = 40
SPECIFICATION_DEPTH = 12

NumberOrNullList = Annotated[
    list[Any],
    WithJsonSchema(
        {
            "type": "array",
            "items": {
                "anyOf": [
                    {"type": "number", "minimum": -VALUE_MAGNITUDE, "maximum": VALUE_MAGNITUDE},
                    {"type": "null"},
                ]
            },
            "minItems": 1,
        }
    ),
]
TimestampList = Annotated[
    list[Any],
    WithJsonSchema(
        {
            "type": "array",
            "items": {"type": "string", "format": "date-time", "maxLength": TIMESTAMP_CHARACTERS},
            "description": "ISO 8601 dates or date-times, strictly increasing.",
        }
    ),
]


RankingMetric = Literal["mase", "smape", "rmse", "mae"]
"""The point scores a backtest (and auto's selection) can rank by: core POINT_METRICS."""

Estimation = Literal["first_origin", "every_origin"]
"""Where a backtest estimates each model: core ``evaluation.backtest.ESTIMATIONS``."""


# Checked by the core (core.checks.check_coverage names the index); stated here for the schema.
CoverageLevels = Annotated[
    list[float],
    WithJsonSchema(
        {
            "type": "array",
            "items": {"type": "number", "exclusiveMinimum": 0, "exclusiveMaximum": 1},
            "minItems": 1,
            "maxItems": 10,
            "description": "Central prediction-interval levels, each strictly between 0 and 1.",
        }
    ),
]


def _whole(value: Any) -> Any:
    """An integral JSON number written with a fraction (3.0) is the integer it names."""
    if isinstance(value, float) and value.is_integer() and abs(value) < 2**53:
        return int(value)
    return value


# Strict mode refuses "3" and true for an integer; 3.0 is the same JSON Schema integer as 3.
# The bounds come before the conversion so that the schema states them as minimum/maximum.
PositiveWhole = Annotated[int, Field(ge=1), BeforeValidator(_whole)]
Lag = Annotated[int, Field(ge=1, le=1000), BeforeValidator(_whole)]
OriginCount = Annotated[int, Field(ge=1, le=100), BeforeValidator(_whole)]
OriginStep = Annotated[int, Field(ge=1, le=100_000), BeforeValidator(_whole)]
SeasonalPeriods = Annotated[
    float | list[Any],
    WithJsonSchema(
        {
            "anyOf": [
                {
                    "type": "number",
                    "minimum": 1,
                    "maximum": MAX_PERIOD,
                    "description": "1 (no season), or at least 2",
                },
                {
                    "type": "array",
                    "items": {"type": "number", "minimum": 2, "maximum": MAX_PERIOD},
                    "minItems": 1,
                    "maxItems": MAX_PERIODS,
                },
            ]
        }
    ),
]


def _depth(value: Any) -> int:
    """How many objects and arrays are nested in a JSON value (iteratively: no recursion)."""
    deepest, stack = 0, [(value, 1)]
    while stack:
        node, level = stack.pop()
        if isinstance(node, dict):
            children: Any = node.values()
        elif isinstance(node, list):
            children = node
        else:
            continue
        deepest = max(deepest, level)
        if deepest > SPECIFICATION_DEPTH:
            break
        stack.extend((child, level + 1) for child in children)
    return deepest


def _shallow(value: Any) -> Any:
    if _depth(value) > SPECIFICATION_DEPTH:
        raise ValueError(
            f"a specification may nest at most {SPECIFICATION_DEPTH} objects and arrays deep"
        )
    return value


# A family's bare name stands for its default specification: "naive" is {"family": "naive"}.
FamilyName = Annotated[
    str,
    Field(
        min_length=1,
        max_length=40,
        description='A family name alone, shorthand for its defaults: "naive" is '
        '{"family": "naive"}.',
    ),
]

# A specification (possibly a combination of combinations): its nesting is bounded before
# anything walks it recursively (300 levels crashed serialisation).
SpecificationObject = Annotated[
    dict[str, Any],
    AfterValidator(_shallow),
    WithJsonSchema(
        {
            "allOf": [{"$ref": "#/components/schemas/Specification"}],
            "description": "A model specification; objects and arrays nest at most "
            f"{SPECIFICATION_DEPTH} levels deep.",
            "x-max-depth": SPECIFICATION_DEPTH,
        }
    ),
]


class Strict(BaseModel):
    """Unknown fields and wrong JSON types are refused (no `true` or `"5"` read as 1 or 5)."""

    model_config = ConfigDict(extra="forbid", strict=True)


class AggregateIn(Strict):
    """Regularise to a coarser frequency before anything else."""

    frequency: str = Field(
        max_length=FREQUENCY_CHARACTERS,
        description="Target frequency (ISO 8601 duration or pandas alias); at least as coarse "
        "as the series' own.",
    )
    method: Literal["sum", "mean", "last"] = Field("sum", description="How to combine values.")


class SeriesIn(Strict):
    """A time series: timestamps + values, or start + frequency + values."""

    values: NumberOrNullList = Field(description="Observations; null marks a missing value.")
    timestamps: TimestampList | None = Field(None, description="ISO 8601, one per value.")
    start: str | None = Field(
        None,
        max_length=TIMESTAMP_CHARACTERS,
        description="First timestamp when timestamps are omitted.",
    )
    frequency: str | None = Field(
        None,
        max_length=FREQUENCY_CHARACTERS,
        description="ISO 8601 duration (P1D, P1W, P1M, PT1H) or alias (D, W-MON, MS, ME, "
        "QE, YE, h, min, s, with a multiple such as 15min); the older spellings M, Q, Y, A, "
        "AS, H, T, S and their lower-case forms are read as the month, quarter, year, hour, "
        "minute and second steps they mean, and the canonical form is echoed. Inferred from "
        "timestamps when absent. Steps of a second or longer.",
    )
    seasonal_period: SeasonalPeriods | None = Field(
        None,
        description="Observations per seasonal cycle, or a list of them for several cycles "
        "([24, 168]: a day and a week of hourly data); non-integer periods (365.25, 52.18) are "
        "allowed. Default from the frequency (hourly [24, 168], daily [7, 365.25], weekly "
        "[52.18], monthly 12, ...), each period kept only with two full cycles of history.",
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


class Out(BaseModel):
    """A response part: every field is described, and an undescribed one is an error."""

    model_config = ConfigDict(extra="forbid")


class Sparse(Out):
    """A response part whose optional fields appear only when the answer has them."""

    @model_serializer(mode="wrap")
    def _given_fields_only(self, handler: SerializerFunctionWrapHandler) -> dict[str, Any]:
        found: dict[str, Any] = handler(self)
        return {k: v for k, v in found.items() if k in self.model_fields_set}


class NotApplicableOut(Out):
    """A section that cannot be computed on this series, with the reason."""

    applicable: Literal[False]
    reason: str


class LjungBoxOut(Out):
    """The Ljung-Box portmanteau statistic at one lag with its chi-square p-value."""

    lag: int
    statistic: float | None
    degrees_of_freedom: int
    p_value: float | None


# A specification as answers echo it: its schema, like the request's `Specification`, is
# built from the registry (service.api.schemas.specification).
SpecificationJson = Annotated[
    dict[str, Any],
    WithJsonSchema({"allOf": [{"$ref": "#/components/schemas/FittedSpecification"}]}),
]
