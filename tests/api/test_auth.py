"""Optional API keys: off by default, Bearer checking on /v1/* when digests are configured."""

from __future__ import annotations

import hashlib
from pathlib import Path

import pytest
from fastapi.testclient import TestClient

from service.api.app import create_app
from service.api.auth import KeyConfigurationError, KeyRing, key_digest, key_ring
from service.config import Settings

KEY = "k3y-for-the-reporting-job"
OTHER = "another-team-key"


def client(**settings: object) -> TestClient:
    # No `with`: the lifespan (the process pool) is not needed by /v1/models or /healthz.
    return TestClient(create_app(Settings(**settings)), raise_server_exceptions=False)


def bearer(key: str) -> dict[str, str]:
    return {"Authorization": f"Bearer {key}"}


def test_off_by_default_leaves_v1_open() -> None:
    response = client().get("/v1/models")
    assert response.status_code == 200
    assert "securitySchemes" not in create_app(Settings()).openapi().get("components", {})


def test_missing_key_is_a_401_problem_with_a_bearer_challenge() -> None:
    response = client(api_keys=key_digest(KEY)).get("/v1/models")
    assert response.status_code == 401
    assert response.headers["content-type"].startswith("application/problem+json")
    assert response.headers["www-authenticate"] == 'Bearer realm="windvane"'
    body = response.json()
    assert body["status"] == 401
    assert body["code"] == "unauthorized"
    assert body["instance"] == "/v1/models"
    assert body["errors"][0]["field"] == "authorization"
    assert body["request_id"] == response.headers["x-request-id"]


def test_wrong_key_says_invalid_token() -> None:
    response = client(api_keys=key_digest(KEY)).get("/v1/models", headers=bearer("guess"))
    assert response.status_code == 401
    assert 'error="invalid_token"' in response.headers["www-authenticate"]
    assert KEY not in response.text


@pytest.mark.parametrize(
    "configured",
    [
        key_digest(KEY),
        hashlib.sha256(KEY.encode()).hexdigest(),
        hashlib.sha256(KEY.encode()).hexdigest().upper(),
        f" {key_digest(OTHER)} , {key_digest(KEY)} ",
    ],
    ids=["prefixed", "bare-hex", "upper-hex", "list-with-spaces"],
)
def test_accepted_key_passes_in_every_digest_form(configured: str) -> None:
    response = client(api_keys=configured).get("/v1/models", headers=bearer(KEY))
    assert response.status_code == 200
    assert "families" in response.json()


def test_scheme_is_case_insensitive_but_must_be_bearer() -> None:
    c = client(api_keys=key_digest(KEY))
    assert c.get("/v1/models", headers={"Authorization": f"bearer {KEY}"}).status_code == 200
    assert c.get("/v1/models", headers={"Authorization": f"Basic {KEY}"}).status_code == 401
    assert c.get("/v1/models", headers={"Authorization": "Bearer "}).status_code == 401


def test_unknown_v1_paths_are_refused_before_routing() -> None:
    # Without a key a caller learns nothing about which routes exist.
    c = client(api_keys=key_digest(KEY))
    assert c.get("/v1/no-such-thing").status_code == 401
    assert c.get("/v1/no-such-thing", headers=bearer(KEY)).status_code == 404


def test_health_stays_open_and_metrics_only_when_asked() -> None:
    open_metrics = client(api_keys=key_digest(KEY))
    assert open_metrics.get("/healthz").status_code == 200
    assert open_metrics.get("/metrics").status_code != 401
    closed = client(api_keys=key_digest(KEY), protect_metrics=True)
    assert closed.get("/healthz").status_code == 200
    assert closed.get("/metrics").status_code == 401
    assert closed.get("/metrics", headers=bearer(KEY)).status_code != 401


def test_protect_metrics_alone_does_not_turn_keys_on() -> None:
    assert client(protect_metrics=True).get("/metrics").status_code != 401


def test_keys_file_with_comments_and_blank_lines(tmp_path: Path) -> None:
    path = tmp_path / "keys"
    path.write_text(f"# reporting\n{key_digest(KEY)}\n\n{key_digest(OTHER)}  # batch\n")
    c = client(api_keys_file=path)
    assert c.get("/v1/models", headers=bearer(KEY)).status_code == 200
    assert c.get("/v1/models", headers=bearer(OTHER)).status_code == 200
    assert c.get("/v1/models", headers=bearer("nope")).status_code == 401


def test_variable_and_file_are_combined(tmp_path: Path) -> None:
    path = tmp_path / "keys"
    path.write_text(key_digest(OTHER) + "\n")
    ring = key_ring(Settings(api_keys=key_digest(KEY), api_keys_file=path))
    assert ring.accepts(KEY) and ring.accepts(OTHER)
    assert len(ring.digests) == 2


@pytest.mark.parametrize(
    ("settings", "message"),
    [
        ({"api_keys": "sha256:abc"}, "WINDVANE_API_KEYS line 1"),
        ({"api_keys": KEY}, "64 hex digits"),
        ({"api_keys": "md5:" + "0" * 64}, "WINDVANE_API_KEYS"),
    ],
)
def test_malformed_digests_fail_when_the_app_is_built(
    settings: dict[str, str], message: str
) -> None:
    with pytest.raises(KeyConfigurationError, match=message):
        create_app(Settings(**settings))


@pytest.mark.parametrize("raw", [KEY, "x" * 500, "sha256:" + KEY])
def test_a_raw_key_in_the_settings_is_refused_without_being_shown(raw: str) -> None:
    with pytest.raises(KeyConfigurationError) as caught:
        key_ring(Settings(api_keys=f"{key_digest(OTHER)},{raw}"))
    message = str(caught.value)
    assert "WINDVANE_API_KEYS line 1" in message
    assert raw.removeprefix("sha256:")[:6] not in message
    assert len(message) < 300


def test_missing_or_empty_keys_file_is_an_error_not_an_open_service(tmp_path: Path) -> None:
    with pytest.raises(KeyConfigurationError, match="cannot read"):
        key_ring(Settings(api_keys_file=tmp_path / "absent"))
    empty = tmp_path / "empty"
    empty.write_text("# nothing yet\n\n")
    with pytest.raises(KeyConfigurationError, match="no key digest"):
        key_ring(Settings(api_keys_file=empty))


def test_ring_matches_any_configured_digest_and_nothing_else() -> None:
    digests = tuple(key_digest(k).removeprefix("sha256:").encode() for k in (KEY, OTHER))
    ring = KeyRing(digests)
    assert ring.accepts(KEY) and ring.accepts(OTHER)
    assert not ring.accepts(KEY + " ")
    assert not ring.accepts("")
    assert not KeyRing(()).enabled and not KeyRing(()).protects("/v1/models")


def test_openapi_declares_the_scheme_on_protected_operations_only() -> None:
    schema = create_app(Settings(api_keys=key_digest(KEY))).openapi()
    scheme = schema["components"]["securitySchemes"]["apiKey"]
    assert (scheme["type"], scheme["scheme"]) == ("http", "bearer")
    models = schema["paths"]["/v1/models"]["get"]
    assert models["security"] == [{"apiKey": []}]
    assert "401" in models["responses"]
    assert "security" not in schema["paths"]["/healthz"]["get"]
    # Built once: a second call returns the same document.
    assert create_app(Settings(api_keys=key_digest(KEY))).openapi() == schema
