"""The JSON Schema of a model specification, one branch per family, built from the registry.

The registry's field metadata (kind, allowed values, bounds) already validates requests and
builds GET /v1/models; the schema comes from the same metadata so that the three agree.
Answers may also carry ``transform`` (the scale a model ran on), which requests give at the
top level instead.
"""

from __future__ import annotations

from typing import Any

from service.core.models.base import ParameterInfo
from service.core.models.registry import FAMILIES, parameters_of

REQUEST = "Specification"
ANSWER = "FittedSpecification"
TRANSFORM = "FittedTransform"

_TRANSFORM: dict[str, Any] = {
    "type": "object",
    "description": "The transform the model was fitted under.",
    "properties": {
        "kind": {"type": "string", "enum": ["none", "log", "boxcox"]},
        "power": {"anyOf": [{"type": "number"}, {"type": "null"}]},
        "back_transform": {"type": "string", "enum": ["mean", "median"]},
    },
    "required": ["kind", "power", "back_transform"],
    "additionalProperties": False,
}


def _bounded(schema: dict[str, Any], p: ParameterInfo) -> dict[str, Any]:
    if p.minimum is not None:
        schema["minimum"] = p.minimum
    if p.maximum is not None:
        schema["maximum"] = p.maximum
    return schema


def _parameter(p: ParameterInfo, name: str) -> dict[str, Any]:
    """The schema of one parameter value; null where the default is null (searched)."""
    ref = {"$ref": f"#/components/schemas/{name}"}
    kinds: dict[str, dict[str, Any]] = {
        "boolean": {"type": "boolean"},
        "integer": _bounded({"type": "integer"}, p),
        "number": _bounded({"type": "number"}, p),
        "choice": {"type": "string", "enum": list(p.allowed or ())},
        "specification": ref,
        "specifications": {"type": "array", "items": ref, "minItems": 1},
        "numbers": {"type": "array", "items": _bounded({"type": "number"}, p)},
        "integers": {"type": "array", "items": _bounded({"type": "integer"}, p)},
    }
    schema = kinds[p.kind]
    if p.default is None:
        schema = {"anyOf": [schema, {"type": "null"}]}
    return {**schema, "description": p.description} if p.description else schema


def specification_schema(name: str = REQUEST) -> dict[str, Any]:
    """``oneOf`` the families, each with its own parameters and nothing else."""
    branches = []
    for family, cls in FAMILIES.items():
        properties: dict[str, Any] = {"family": {"type": "string", "const": family}}
        for p in parameters_of(cls):
            properties[p.name] = _parameter(p, name)
        if name == ANSWER:
            properties["transform"] = {"$ref": f"#/components/schemas/{TRANSFORM}"}
        branches.append(
            {
                "type": "object",
                "title": family,
                "description": cls.summary,
                "properties": properties,
                "required": ["family"],
                "additionalProperties": False,
            }
        )
    return {
        "oneOf": branches,
        "discriminator": {"propertyName": "family"},
        "description": "A model family and its own parameters (GET /v1/models lists them).",
    }


def add_specification_schemas(document: dict[str, Any]) -> dict[str, Any]:
    """The OpenAPI document with the two specification components filled in."""
    schemas = document.setdefault("components", {}).setdefault("schemas", {})
    schemas[REQUEST] = specification_schema(REQUEST)
    schemas[ANSWER] = specification_schema(ANSWER)
    schemas[TRANSFORM] = _TRANSFORM
    return document
