"""One item of a batch: checked on its own, answered on its own, its failure its own.

POST /v1/forecast-batches checks items here and runs their work through the server's pool;
`windvane batch` runs ``answer_entry`` whole in a loky or Dask worker. Both use the request
schema, the task, the cache keys and the fitting functions of POST /v1/forecasts, so a batch
item and a single request on the same data share cache entries.
"""

from __future__ import annotations

import gc
import json
from dataclasses import dataclass
from typing import Any

from pydantic import ValidationError

from service.api import caching, render
from service.api.problems import domain_errors, problem_response, validation_problem
from service.api.routes.forecasts import ITEM_ACCEPT, fit_key_for
from service.api.schemas.batches import ID_LENGTH
from service.api.schemas.forecasts import ForecastRequest
from service.api.tasks import forecast_task
from service.config import Settings
from service.core.data.series import ParsedSeries
from service.core.errors import WindvaneError
from service.runtime import jobs
from service.runtime.cache import Cache
from service.runtime.keys import data_key
from service.runtime.pool import BudgetExceeded, PoolBusy, PoolClosed, WorkerCrashed
from service.runtime.workers import pin_threads


@dataclass(frozen=True)
class CheckedEntry:
    """A valid item: the request without its id, the worker's task and the parsed series."""

    request: ForecastRequest
    task: jobs.ForecastTask
    series: ParsedSeries


class ItemProblem(Exception):
    """An item that cannot be answered; ``body`` is its RFC 9457 problem document."""

    def __init__(self, body: dict[str, Any]) -> None:
        super().__init__(body.get("detail", ""))
        self.body = body


def entry_id(raw: Any) -> str | None:
    """The caller's id of a raw item, when it is a short string (echoed even on a problem)."""
    ident = raw.get("id") if isinstance(raw, dict) else None
    return ident if isinstance(ident, str) and len(ident) <= ID_LENGTH else None


def check_entry(raw: Any, index: int, settings: Settings) -> CheckedEntry:
    """Validate one raw item as POST /v1/forecasts would; ItemProblem names its fields."""
    prefix = f"requests[{index}]"
    if not isinstance(raw, dict):
        raise ItemProblem(
            problem(422, "invalid_request", "each request must be a JSON object", prefix)
        )
    fields = dict(raw)
    ident = fields.pop("id", None)
    try:
        if ident is not None and entry_id({"id": ident}) is None:
            raise ItemProblem(
                problem(
                    422,
                    "invalid_request",
                    f"a string of at most {ID_LENGTH} characters",
                    f"{prefix}.id",
                )
            )
        request = ForecastRequest.model_validate(fields)
        task, series = forecast_task(request, settings)
    except ValidationError as exc:
        status, code, detail, errors = validation_problem(exc.errors(), prefix=prefix)
        raise ItemProblem(problem(status, code, detail, errors=errors)) from None
    except WindvaneError as exc:
        raise ItemProblem(domain_problem(exc, prefix)) from None
    return CheckedEntry(request, task, series)


def problem(
    status: int,
    code: str,
    detail: str,
    field: str | None = None,
    *,
    errors: list[dict[str, str]] | None = None,
    title: str | None = None,
) -> dict[str, Any]:
    """A problem document for one item (the same shape as the HTTP problems)."""
    listed = (
        errors if errors is not None else ([{"field": field, "message": detail}] if field else [])
    )
    response = problem_response(status, code, detail, title=title, errors=listed)
    body: dict[str, Any] = json.loads(bytes(response.body))
    return body


def domain_problem(exc: WindvaneError, prefix: str) -> dict[str, Any]:
    """A domain error of one item, its fields under ``prefix``."""
    return problem(422, exc.code, exc.message, errors=domain_errors(exc, prefix), title=exc.title)


def failure_problem(exc: BaseException) -> dict[str, Any]:
    """Any other failure of one item: the pool's 503 kinds by name, anything else a 500."""
    kinds: dict[type[BaseException], str] = {
        PoolBusy: "overloaded",
        BudgetExceeded: "time_budget_exceeded",
        WorkerCrashed: "worker_crashed",
        PoolClosed: "shutting_down",
    }
    for kind, code in kinds.items():
        if isinstance(exc, kind):
            return problem(503, code, str(exc))
    if isinstance(exc, WindvaneError):
        return domain_problem(exc, "")
    return problem(500, "internal_error", f"the item failed: {type(exc).__name__}")


def outcome(
    index: int, ident: str | None, *, forecast: Any = None, problem_body: Any = None
) -> dict[str, Any]:
    """One answer of a batch: the caller's id and index, a status, a forecast or a problem."""
    if problem_body is not None:
        return {
            "index": index,
            "id": ident,
            "status": problem_body["status"],
            "problem": problem_body,
        }
    return {"index": index, "id": ident, "status": 200, "forecast": forecast}


_CACHES: dict[tuple[Any, ...], Cache] = {}


def _worker_cache(settings: Settings) -> Cache:
    """One cache per worker process and directory, opened on the first item."""
    secret = settings.cache_secret
    ident = (
        settings.cache,
        str(settings.cache_dir),
        settings.cache_max_bytes,
        secret.get_secret_value() if secret is not None else None,
    )
    if ident not in _CACHES:
        pin_threads()  # once per process, as in the server's pool
        _CACHES[ident] = caching.cache_from(settings)
    return _CACHES[ident]


_SETTLED: list[bool] = []


def settle() -> None:
    """Once per process, after its first item: move everything built so far (the libraries'
    modules, the lazily imported ones included) out of the garbage collector's way, as the
    server does at start-up. A full collection otherwise walks those ~170,000 objects, about
    0.14 CPU-s; loky workers run one every second when psutil is not installed, which cost
    a worker 0.12 CPU-s per series of 0.65 (tests/benchmarks/RESULTS.md)."""
    if not _SETTLED:
        _SETTLED.append(True)
        gc.collect()
        gc.freeze()


def answer_entry(raw: Any, index: int, settings: Settings) -> dict[str, Any]:
    """The batch job: one raw item to its outcome, in whatever process runs it; never raises.

    Looks up and stores through the same cache keys as the server's batch items, so workers
    sharing a cache directory (and WINDVANE_CACHE_SECRET) reuse each other's answers."""
    ident = entry_id(raw)
    try:
        checked = check_entry(raw, index, settings)
        body = computed(checked, _worker_cache(settings), settings)
    except ItemProblem as exc:
        return outcome(index, ident, problem_body=exc.body)
    except Exception as exc:
        return outcome(index, ident, problem_body=failure_problem(exc))
    finally:
        settle()
    return outcome(index, ident, forecast=body)


def computed(checked: CheckedEntry, cache: Cache, settings: Settings) -> dict[str, Any]:
    """The answer to one checked item from the response cache (memory, disk) or computed
    here, with the fit store for an explicit specification; stored as the server stores it."""
    shown = settings.library_versions
    key = caching.validated_key(checked.request.model_dump(mode="json"), ITEM_ACCEPT, shown)
    found = cache.get_response(key)
    if not found.hit:
        found = cache.load_response(key)
    if found.hit and found.value is not None:
        return dict(json.loads(found.value.body("hit")))
    task, series = checked.task, checked.series
    if task.specification is None or not cache.enabled:
        body = render.forecast_answer(jobs.forecast(task))
    else:
        fitted_key = fit_key_for(task)
        stored = cache.load_fitted(fitted_key)
        answer, fresh = jobs.forecast_stored(stored.value if stored.hit else None, task)
        body = render.forecast_answer(answer)  # an overflowing forecast is refused first
        if fresh is not None:
            cache.save_fitted(fitted_key, fresh)
    provenance = {"data_hash": data_key(series.y).label, **caching.provenance_fields(shown)}
    finished = caching.stored_response(body, provenance, len(series.y))
    if cache.enabled:
        cache.put_response(key, finished)
        cache.save_response(key, finished)
    return dict(json.loads(finished.body("miss" if cache.enabled else "off")))
