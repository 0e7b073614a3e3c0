"""POST /v1/forecast-batches: many forecasts across the pool, each failing alone, streamed.

With `Accept: application/x-ndjson` every item is one JSON line sent as soon as it is
answered (order of completion, each line carrying the caller's `id` and `index`), and a last
line holds the counts and the portfolio summary; otherwise one JSON document in request
order. As many items run at once as the pool has workers. The body is read and parsed in a
thread (a batch may be tens of MB), and each item is checked on its own, so a malformed item
is that item's problem. Past WINDVANE_BATCH_SECONDS the items not yet answered are `not_run`.
"""

from __future__ import annotations

import asyncio
import copy
import inspect
import json
from collections.abc import AsyncIterator, Callable, Iterator
from typing import Any, TypeVar

from fastapi import APIRouter, Request
from fastapi.exceptions import RequestValidationError
from fastapi.responses import StreamingResponse
from pydantic import ValidationError

from service.api import examples
from service.api.batch_items import (
    ItemProblem,
    check_entry,
    entry_id,
    failure_problem,
    outcome,
    problem,
)
from service.api.decoding import decode_batch
from service.api.dependencies import PoolDep, SettingsDep
from service.api.media import NDJSON
from service.api.problems import PROBLEM_RESPONSES
from service.api.routes.forecasts import answer_forecast
from service.api.schemas.batches import (
    ID_LENGTH,
    BatchClosing,
    BatchEntry,
    BatchEnvelope,
    BatchRequest,
    BatchResponse,
)
from service.config import Settings
from service.core.errors import RequestError
from service.runtime.pool import BudgetExceeded, WorkPool
from service.runtime.portfolio import portfolio, summary_row

router = APIRouter(prefix="/v1", tags=["forecasts"])


T = TypeVar("T")
REQUEST_SCHEMA = "#/components/schemas/BatchRequest"


def _request_body() -> dict[str, Any]:
    examples_ = examples.request_examples("batch")
    return {
        "required": True,
        "content": {
            "application/json": {"schema": {"$ref": REQUEST_SCHEMA}, "examples": examples_}
        },
    }


_RESPONSES: dict[int | str, dict[str, Any]] = {
    **PROBLEM_RESPONSES,
    200: {
        "description": "Every item answered (JSON, in request order), or one line per item "
        "in order of completion then a closing line (NDJSON).",
        "content": {NDJSON: {"schema": {"$ref": "#/components/schemas/BatchLine"}}},
    },
}


def document(schema: dict[str, Any]) -> dict[str, Any]:
    """Add the batch request's schemas to an OpenAPI document (the route parses its body
    itself, off the event loop, so FastAPI does not see the model). A batch entry is the
    ForecastRequest component plus `id`."""
    components = schema.setdefault("components", {}).setdefault("schemas", {})
    if "BatchRequest" in components:
        return schema
    forecast = copy.deepcopy(components["ForecastRequest"])
    ident = BatchEntry.model_fields["id"]
    entry = {
        **forecast,
        "title": "BatchEntry",
        "description": inspect.getdoc(BatchEntry),
        "properties": {
            "id": {
                "anyOf": [{"type": "string", "maxLength": ID_LENGTH}, {"type": "null"}],
                "description": ident.description,
            },
            **forecast["properties"],
        },
    }
    requests = BatchRequest.model_fields["requests"]
    components["BatchEntry"] = entry
    components["BatchRequest"] = {
        "title": "BatchRequest",
        "description": inspect.getdoc(BatchRequest),
        "type": "object",
        "properties": {
            "requests": {
                "type": "array",
                "items": {"$ref": "#/components/schemas/BatchEntry"},
                "minItems": 1,
                "description": requests.description,
            }
        },
        "required": ["requests"],
        "additionalProperties": False,
    }
    closing = BatchClosing.model_json_schema(ref_template="#/components/schemas/{model}")
    for name, definition in closing.pop("$defs", {}).items():
        components.setdefault(name, definition)
    components["BatchClosing"] = closing
    components["BatchLine"] = {
        "title": "BatchLine",
        "description": "One line of an NDJSON batch: an item as it is answered, or the "
        "closing line (the last).",
        "oneOf": [
            {"$ref": "#/components/schemas/BatchItem"},
            {"$ref": "#/components/schemas/BatchClosing"},
        ],
    }
    return schema


@router.post(
    "/forecast-batches",
    summary="Forecast many series, streamed on request",
    response_model=BatchResponse,
    responses=_RESPONSES,
    openapi_extra={"requestBody": _request_body()},
)
async def create_batch(request: Request, pool: PoolDep, settings: SettingsDep) -> Any:
    """Answer each request as POST /v1/forecasts would, in parallel across the pool; a failing
    or malformed one becomes a problem item and the others still succeed. Send
    `Accept: application/x-ndjson` for one line per item as soon as it is answered."""
    raw = await request.body()
    items = await asyncio.to_thread(_items_of, raw, settings)
    results = _answered(items, pool, settings, request)
    if NDJSON in request.headers.get("accept", ""):
        return StreamingResponse(_lines(results), media_type=NDJSON)
    found = [r async for r in results]
    found.sort(key=lambda r: r["index"])
    return {"results": found, **_closing(found)}


def _items_of(raw: bytes, settings: Settings) -> list[Any]:
    """The raw items of a batch body; a body that is not a batch at all is refused whole."""
    try:
        parsed = decode_batch(raw)  # item by item: the loop runs between items
    except (ValueError, RecursionError) as exc:
        where = f"{getattr(exc, 'msg', 'invalid JSON')} at byte {getattr(exc, 'pos', 0)}"
        error = {"type": "json_invalid", "loc": ("body",), "msg": where, "ctx": {"error": where}}
        raise RequestValidationError([error]) from None
    try:
        envelope = BatchEnvelope.model_validate(parsed)
    except ValidationError as exc:
        raise RequestValidationError(
            [{**e, "loc": ("body", *e["loc"])} for e in exc.errors(include_url=False)]
        ) from None
    if len(envelope.requests) > settings.max_batch_series:
        raise RequestError(
            f"a batch holds at most {settings.max_batch_series} requests", field="requests"
        )
    return envelope.requests


class _Deadline:
    """The pool as seen by one batch: no job runs past the batch's time budget."""

    def __init__(self, pool: WorkPool, deadline: float) -> None:
        self.pool = pool
        self.deadline = deadline
        self.workers = pool.workers

    def left(self) -> float:
        """Seconds until the deadline."""
        return self.deadline - asyncio.get_running_loop().time()

    async def run(
        self,
        fn: Callable[..., T],
        *args: Any,
        budget_seconds: float | None = None,
        spread: bool = False,
    ) -> T:
        """The pool's run, its budget cut to what is left of the batch's; never spread (the
        batch keeps every worker busy with its own items)."""
        left = self.left()
        if left <= 0:
            raise _NotRun()
        budget = budget_seconds if budget_seconds is not None else self.pool.budget_seconds
        return await self.pool.run(fn, *args, budget_seconds=min(budget, left))


class _NotRun(Exception):
    """The batch's time budget ran out before (or while) this item ran."""


async def _answered(
    items: list[Any], pool: WorkPool, settings: Settings, request: Request
) -> AsyncIterator[dict[str, Any]]:
    """Each item's outcome in order of completion, ``pool.workers`` items at a time."""
    limited = _Deadline(pool, asyncio.get_running_loop().time() + settings.batch_seconds)
    queue: asyncio.Queue[dict[str, Any]] = asyncio.Queue()
    waiting: Iterator[tuple[int, Any]] = iter(enumerate(items))

    async def lane() -> None:
        for index, raw in waiting:  # shared: each lane takes the next item
            await queue.put(await _one(index, raw, limited, settings, request))

    lanes = [asyncio.create_task(lane()) for _ in range(max(1, limited.workers))]
    try:
        for _ in range(len(items)):
            yield await queue.get()
    finally:
        for task in lanes:
            task.cancel()
        await asyncio.gather(*lanes, return_exceptions=True)


async def _one(
    index: int, raw: Any, pool: _Deadline, settings: Settings, request: Request
) -> dict[str, Any]:
    """One item's outcome; never raises (but for cancellation)."""
    ident = entry_id(raw)
    try:
        if pool.left() <= 0:
            raise _NotRun()
        checked = await asyncio.to_thread(check_entry, raw, index, settings)
        found = await answer_forecast(checked.request, pool, request)
    except ItemProblem as exc:
        return outcome(index, ident, problem_body=exc.body)
    except (_NotRun, BudgetExceeded) as exc:
        if isinstance(exc, BudgetExceeded) and pool.left() > 0:
            return outcome(index, ident, problem_body=failure_problem(exc))
        detail = f"the batch's time budget of {settings.batch_seconds:g} s ran out first"
        return outcome(index, ident, problem_body=problem(503, "not_run", detail))
    except Exception as exc:
        return outcome(index, ident, problem_body=failure_problem(exc))
    return outcome(index, ident, forecast=found)


def _closing(results: list[dict[str, Any]]) -> dict[str, Any]:
    """Counts and the portfolio summary of a finished batch."""
    summary = portfolio(summary_row(r) for r in results)
    succeeded = sum(1 for r in results if r["status"] == 200)
    return {
        "succeeded": succeeded,
        "failed": len(results) - succeeded - summary["not_run"],
        "not_run": summary["not_run"],
        "summary": summary,
    }


async def _lines(results: AsyncIterator[dict[str, Any]]) -> AsyncIterator[bytes]:
    """One JSON line per item as it is answered, then the closing line."""
    seen: list[dict[str, Any]] = []
    async for result in results:
        try:
            line = json.dumps(result, separators=(",", ":"), allow_nan=False)
        except ValueError:  # a non-finite number: the JSON answer would have refused it too
            body = problem(500, "internal_error", "the answer held a non-finite number")
            result = outcome(result["index"], result["id"], problem_body=body)
            line = json.dumps(result, separators=(",", ":"))
        seen.append(_light(result))
        yield line.encode() + b"\n"
    yield json.dumps(_closing(seen), separators=(",", ":")).encode() + b"\n"


def _light(result: dict[str, Any]) -> dict[str, Any]:
    """What the closing line needs of an item, so a long stream does not hold every forecast."""
    forecast = result.get("forecast")
    if not forecast:
        return result
    kept = {k: forecast.get(k) for k in ("model", "selection", "warnings")}
    return {**result, "forecast": kept}
