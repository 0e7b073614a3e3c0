"""The response cache in the app: hits from the request bytes, from the validated request and
from disk; identical concurrent requests computed once; a hit still needs an API key."""

from __future__ import annotations

import json
import re
from concurrent.futures import ThreadPoolExecutor
from pathlib import Path
from typing import Any

from service.api.auth import key_digest

BODY: dict[str, Any] = {
    "series": {
        "start": "2024-01-01",
        "frequency": "MS",
        "values": [12.0, 14.0, 13.5, 15.0, 16.25, 15.5, 17.0, 18.0, 17.5, 19.0, 18.5, 20.0],
    },
    "horizon": 3,
    "coverage": [0.8],
    "model": {"family": "ets", "error": "add", "trend": "add", "season": "none"},
}
MEMORY_HIT = "windvane-response; hit; detail=memory"


def fits(client: Any, family: str) -> float:
    """How many fits the server recorded for ``family``."""
    text = client.get("/metrics").text
    found = re.search(rf'windvane_fit_duration_seconds_count{{family="{family}"}} ([0-9.]+)', text)
    return float(found.group(1)) if found else 0.0


def post_raw(client: Any, data: bytes, **headers: str) -> Any:
    return client.post(
        "/v1/forecasts", content=data, headers={"content-type": "application/json", **headers}
    )


def test_the_same_request_formatted_differently_is_a_hit(make_client: Any) -> None:
    with make_client() as client:
        first = post_raw(client, json.dumps(BODY).encode())
        assert first.status_code == 200, first.text
        spaced = json.dumps(dict(reversed(BODY.items())), indent=2).encode()
        again = post_raw(client, spaced)
        assert again.headers["cache-status"] == MEMORY_HIT
        assert again.json()["provenance"]["cache"] == "hit"
        assert again.content == first.content.replace(b'"cache":"miss"', b'"cache":"hit"')
        # Explicit defaults validate to the same request: a hit of the validated layer.
        explicit = post_raw(client, json.dumps({**BODY, "metric": "mase"}).encode())
        assert explicit.headers["cache-status"] == MEMORY_HIT
        assert fits(client, "ets") == 1


def test_a_hit_is_only_the_answer_to_the_same_request(make_client: Any) -> None:
    with make_client() as client:
        assert post_raw(client, json.dumps(BODY).encode()).status_code == 200
        # The same bytes sent as text are not JSON to the route: never a cached 200.
        as_text = post_raw(client, json.dumps(BODY).encode(), **{"content-type": "text/plain"})
        assert as_text.status_code == 415  # a body type the route does not read
        other = post_raw(client, json.dumps({**BODY, "horizon": 4}).encode())
        assert other.json()["provenance"]["cache"] == "miss"
        assert len(other.json()["point"]) == 4


def test_identical_concurrent_requests_are_computed_once(make_client: Any) -> None:
    body = {**BODY, "model": "auto"}
    with make_client() as client, ThreadPoolExecutor(4) as threads:
        answers = list(threads.map(lambda _: client.post("/v1/forecasts", json=body), range(4)))
        assert [a.status_code for a in answers] == [200] * 4
        assert sorted(a.json()["provenance"]["cache"] for a in answers) == [
            "hit",
            "hit",
            "hit",
            "miss",
        ]
        assert fits(client, "auto") == 1


def test_a_batch_item_reuses_a_single_answer(make_client: Any) -> None:
    with make_client() as client:
        single = client.post("/v1/forecasts", json=BODY)
        batch = client.post("/v1/forecast-batches", json={"requests": [BODY]})
        assert batch.status_code == 200, batch.text
        [item] = batch.json()["results"]
        assert item["forecast"]["provenance"]["cache"] == "hit"
        assert item["forecast"]["point"] == single.json()["point"]


def test_a_second_process_on_the_same_directory_hits_the_disk(
    make_client: Any, tmp_path: Path
) -> None:
    shared = {"cache_dir": tmp_path / "shared", "cache_secret": "shared secret"}
    body = {**BODY, "model": "auto"}
    with make_client(**shared) as first:
        computed = first.post("/v1/forecasts", json=body)
        assert computed.json()["provenance"]["cache"] == "miss"
    with make_client(**shared) as second:
        again = second.post("/v1/forecasts", json=body)
        assert again.headers["cache-status"] == "windvane-response; hit; detail=disk"
        assert again.json()["point"] == computed.json()["point"]
        assert fits(second, "auto") == 0
        # Now in this process's memory as well.
        assert second.post("/v1/forecasts", json=body).headers["cache-status"] == MEMORY_HIT


def test_a_cached_answer_still_needs_an_api_key(make_client: Any) -> None:
    key = "reporting-job-key"
    with make_client(api_keys=key_digest(key)) as client:
        headers = {"Authorization": f"Bearer {key}"}
        assert client.post("/v1/forecasts", json=BODY, headers=headers).status_code == 200
        assert (
            client.post("/v1/forecasts", json=BODY, headers=headers).headers["cache-status"]
            == MEMORY_HIT
        )
        assert client.post("/v1/forecasts", json=BODY).status_code == 401


def test_two_processes_sharing_a_directory_compute_a_request_once(
    make_client: Any, tmp_path: Path
) -> None:
    shared = {"cache_dir": tmp_path / "shared", "cache_secret": "shared secret"}
    body = {**BODY, "model": "auto", "horizon": 5}
    with make_client(**shared) as one, make_client(**shared) as two:
        with ThreadPoolExecutor(2) as threads:
            answers = list(
                threads.map(lambda c: c.post("/v1/forecasts", json=body), [one, two, one, two])
            )
        assert [a.status_code for a in answers] == [200] * 4
        assert fits(one, "auto") + fits(two, "auto") == 1
        points = {json.dumps(a.json()["point"]) for a in answers}
        assert len(points) == 1
