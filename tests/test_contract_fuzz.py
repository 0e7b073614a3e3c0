"""Contract fuzzing: generated requests to every operation of the live app (ASGI, in process).

Schemathesis draws valid and invalid requests from the app's own OpenAPI document; every
answer must be a non-5xx, validate against the documented response, and every error must be
an RFC 9457 problem. Hypothesis runs derandomized, so a failure reproduces.
"""

from __future__ import annotations

import time
from collections import Counter
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import pytest
import schemathesis
from fastapi.testclient import TestClient
from hypothesis import HealthCheck, given, settings
from hypothesis.errors import Unsatisfiable
from schemathesis import GenerationMode
from schemathesis.checks import not_a_server_error
from schemathesis.specs.openapi.checks import (
    content_type_conformance,
    response_headers_conformance,
    response_schema_conformance,
    status_code_conformance,
)

from service.api.app import create_app
from service.config import Settings

pytestmark = pytest.mark.slow

# Small limits keep the generated series (and so the fits) short: ~60 s for the whole file.
LIMITS = {"max_points": 48, "max_horizon": 12, "max_batch_series": 3, "fit_seconds": 10.0}
EXAMPLES = {GenerationMode.POSITIVE: 60, GenerationMode.NEGATIVE: 40}
MINIMUM_CASES = 200
CHECKS = [
    not_a_server_error,
    status_code_conformance,
    content_type_conformance,
    response_headers_conformance,
    response_schema_conformance,
]
PROBLEM = "application/problem+json"
READY_SECONDS = 60

SENT: Counter[str] = Counter()
STATUSES: Counter[int] = Counter()


@pytest.fixture(scope="module")
def client(tmp_path_factory: pytest.TempPathFactory) -> Iterator[TestClient]:
    directory: Path = tmp_path_factory.mktemp("fuzz")
    app = create_app(
        Settings(
            pool_workers=1,
            queue_size=4,
            cache_dir=directory / "cache",
            metrics_dir=directory / "metrics",
            api_keys="",
            **LIMITS,
        )
    )
    with TestClient(app, raise_server_exceptions=False) as test_client:
        # The pool starts in the background: fuzz the ready service (/readyz answers 200).
        deadline = time.monotonic() + READY_SECONDS
        while test_client.get("/readyz").status_code != 200 and time.monotonic() < deadline:
            time.sleep(0.05)
        yield test_client


@pytest.fixture(scope="module")
def schema(client: TestClient) -> Any:
    # From the app's own document, so schemathesis starts no second lifespan of its own.
    return schemathesis.openapi.from_dict(client.app.openapi())  # type: ignore[attr-defined]


def operations(schema: Any) -> list[Any]:
    return [result.ok() for result in schema.get_all_operations()]


def check_problem(response: Any, where: str) -> None:
    """Every 4xx/5xx is problem+json with the RFC 9457 members and our `errors` list."""
    if response.status_code < 400:
        return
    assert response.headers["content-type"].startswith(PROBLEM), (where, response.headers)
    body = response.json()
    assert body["status"] == response.status_code, (where, body)
    for member in ("type", "title", "detail", "instance"):
        assert isinstance(body.get(member), str), (where, member, body)
    assert isinstance(body.get("errors"), list), (where, body)
    assert "Traceback" not in response.text, where


@pytest.mark.parametrize("mode", list(EXAMPLES), ids=lambda m: m.value)
def test_every_operation_keeps_its_contract(
    client: TestClient, schema: Any, mode: GenerationMode
) -> None:
    for operation in operations(schema):

        @settings(
            max_examples=EXAMPLES[mode],
            deadline=None,
            derandomize=True,
            database=None,
            suppress_health_check=list(HealthCheck),
            print_blob=False,
        )
        @given(case=operation.as_strategy(generation_mode=mode))
        def exchange(case: Any) -> None:
            where = f"{case.operation.method.upper()} {case.operation.path}"
            kwargs = case.as_transport_kwargs()
            # No operation takes cookies; per-request cookies are deprecated in the client.
            assert not kwargs.pop("cookies", None)
            if isinstance(kwargs.get("data"), (bytes, str)):
                kwargs["content"] = kwargs.pop("data")  # raw bodies go as content= in httpx
            response = client.request(**kwargs)
            SENT[mode.value] += 1
            STATUSES[response.status_code] += 1
            assert response.status_code < 500, f"{where}: {response.status_code} {response.text}"
            check_problem(response, where)
            case.validate_response(response, checks=CHECKS)

        try:
            exchange()
        except Unsatisfiable:
            # A GET without parameters has nothing to make invalid; a body always has.
            if mode is GenerationMode.POSITIVE or operation.method.upper() != "GET":
                raise


def test_enough_cases_were_sent(record_property: Any) -> None:
    # Runs after the two parametrised tests above (file order), so the counter is complete.
    total = sum(SENT.values())
    record_property("generated_cases", total)
    print(f"contract fuzzing sent {total} cases: {dict(SENT)}; statuses {dict(STATUSES)}")
    assert total >= MINIMUM_CASES, f"only {total} generated cases were sent: {dict(SENT)}"
