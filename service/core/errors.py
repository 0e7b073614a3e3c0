"""Domain errors of the core, all rooted in ValueError.

    WindvaneError(ValueError)          a request the core cannot serve
    ├── SeriesError                    the series itself is malformed or unusable
    ├── SpecificationError             unknown family, unknown or bad parameter
    ├── RequestError                   a request option is out of range (horizon, coverage, ...)
    └── FitError                       this specification cannot fit this series

Each error carries one or more (field, message) pairs so that the API can name the
offending field; fields are dotted paths relative to the request body, with indexes
in brackets (``series.values[3]``).
"""

from __future__ import annotations

from dataclasses import dataclass


@dataclass(frozen=True)
class FieldProblem:
    """One offending field and what is wrong with it."""

    field: str
    message: str


class WindvaneError(ValueError):
    """Root of the core's errors: the request cannot be served as asked."""

    title = "Invalid request"
    code = "invalid_request"

    def __init__(
        self, message: str, field: str | None = None, problems: list[FieldProblem] | None = None
    ) -> None:
        super().__init__(message)
        self.message = message
        found = list(problems or [])
        if field is not None and not found:
            found.append(FieldProblem(field, message))
        self.problems: list[FieldProblem] = found

    def prefixed(self, prefix: str) -> WindvaneError:
        """The same error with every field placed under ``prefix`` (e.g. ``series``)."""
        moved = [FieldProblem(_join(prefix, p.field), p.message) for p in self.problems]
        clone = type(self)(self.message, problems=moved)
        return clone

    def moved_under(self, field: str) -> WindvaneError:
        """The same error with its ``model`` fields placed under ``field``: a nested
        specification's errors named where it stands (``model.members[1]``, ``candidates[1]``)."""
        if field == "model":
            return self
        moved = []
        for p in self.problems:
            name = p.field
            if name == "model" or name.startswith("model."):
                name = field + name[len("model") :]
            moved.append(FieldProblem(name, p.message))
        return type(self)(self.message, problems=moved)


def _join(prefix: str, field: str) -> str:
    if not prefix:
        return field
    if not field:
        return prefix
    return f"{prefix}{field}" if field.startswith("[") else f"{prefix}.{field}"


class SeriesError(WindvaneError):
    """The series is malformed: lengths, timestamps, values or frequency."""

    title = "Invalid series"
    code = "invalid_series"


class SpecificationError(WindvaneError):
    """A model specification names an unknown family or parameter, or a bad value."""

    title = "Invalid model specification"
    code = "invalid_specification"


class RequestError(WindvaneError):
    """A request option (horizon, coverage, lags, origins, ...) is out of range."""

    title = "Invalid request option"
    code = "invalid_option"


class FitError(WindvaneError):
    """This specification cannot be fitted to this series (and no fallback was asked for)."""

    title = "Model cannot fit this series"
    code = "unfittable"
