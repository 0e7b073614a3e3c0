"""One structured JSON line per request on stdout, through the logging module.

The record has a field for everything an operator needs and no field that could carry the
series values, so the values cannot leak into the log by accident.
"""

from __future__ import annotations

import json
import logging
import sys
from dataclasses import dataclass
from typing import IO, Any

REQUEST_LOGGER = "windvane.requests"


@dataclass(frozen=True)
class RequestRecord:
    """What is logged about one request (never its series values or name)."""

    request_id: str
    route: str
    method: str
    status: int
    duration_seconds: float
    cache: str | None = None
    model: str | None = None
    series_length: int | None = None


class JsonLines(logging.Formatter):
    """Formats a record as one JSON object: time, level, logger, message and its fields."""

    def format(self, record: logging.LogRecord) -> str:
        out: dict[str, Any] = {
            "time": self.formatTime(record, "%Y-%m-%dT%H:%M:%S"),
            "level": record.levelname.lower(),
            "logger": record.name,
            "message": record.getMessage(),
        }
        fields = getattr(record, "windvane", None)
        if isinstance(fields, dict):
            out.update(fields)
        if record.exc_info:
            out["error"] = self.formatException(record.exc_info)
        return json.dumps(out, separators=(",", ":"), default=str)


def request_logger(stream: IO[str] | None = None) -> logging.Logger:
    """The request logger, writing JSON lines to ``stream`` (stdout by default) exactly once."""
    logger = logging.getLogger(REQUEST_LOGGER)
    for handler in list(logger.handlers):
        if getattr(handler, "windvane", False):
            logger.removeHandler(handler)
    handler = logging.StreamHandler(stream if stream is not None else sys.stdout)
    handler.setFormatter(JsonLines())
    handler.windvane = True  # type: ignore[attr-defined]
    logger.addHandler(handler)
    logger.setLevel(logging.INFO)
    # The uvicorn access log already goes to the root; this line is our own.
    logger.propagate = False
    return logger


def log_request(logger: logging.Logger, record: RequestRecord) -> None:
    """Write one request's line; a 5xx is logged as an error, everything else as info."""
    # vars(), not dataclasses.asdict: the fields are flat, and asdict deep-copies each one,
    # a cost paid on every request, cache hits included.
    fields = {k: v for k, v in vars(record).items() if v is not None}
    fields["duration_seconds"] = round(record.duration_seconds, 6)
    level = logging.ERROR if record.status >= 500 else logging.INFO
    logger.log(level, "request", extra={"windvane": fields})
