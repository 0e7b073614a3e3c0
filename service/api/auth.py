"""Optional API keys: `Authorization: Bearer <key>` on /v1/* (and /metrics if asked).

Off by default. Only SHA-256 digests of the keys are configured, so a leaked settings file
or process environment does not leak a usable key. Health stays open for orchestrators.
"""

from __future__ import annotations

import hashlib
import hmac
import re
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from fastapi import FastAPI, Request
from starlette.types import ASGIApp, Receive, Scope, Send

from service.api.middleware import header
from service.api.problems import PROBLEM_MEDIA_TYPE, problem_response
from service.config import Settings

_HEX_DIGEST = re.compile(r"^[0-9a-f]{64}$")
_PREFIX = "sha256:"
SCHEME_NAME = "apiKey"


class KeyConfigurationError(ValueError):
    """The configured key digests are malformed; raised when the app is built, never per request."""


@dataclass(frozen=True)
class KeyRing:
    """The accepted key digests and which paths need one."""

    digests: tuple[bytes, ...]
    protect_metrics: bool = False

    @property
    def enabled(self) -> bool:
        """Keys are checked only when at least one digest is configured."""
        return bool(self.digests)

    def protects(self, path: str) -> bool:
        """Whether a request to ``path`` needs a key."""
        if not self.enabled:
            return False
        if path == "/v1" or path.startswith("/v1/"):
            return True
        return self.protect_metrics and path == "/metrics"

    def accepts(self, key: str) -> bool:
        """Whether ``key`` hashes to a configured digest, compared in constant time."""
        given = hashlib.sha256(key.encode("utf-8")).hexdigest().encode("ascii")
        found = False
        for digest in self.digests:
            # No early exit: the time taken says nothing about which digest matched.
            found |= hmac.compare_digest(given, digest)
        return found


def key_digest(key: str) -> str:
    """The `sha256:<hex>` form of a key, as an operator would put it in WINDVANE_API_KEYS."""
    return _PREFIX + hashlib.sha256(key.encode("utf-8")).hexdigest()


def parse_digest(text: str, where: str) -> bytes:
    """One configured digest ('sha256:<hex>' or bare hex) as lowercase ASCII hex bytes.

    A malformed entry is most likely a raw key pasted by mistake: the error names where it
    is, never what it is, so that start-up logs do not carry the secret.
    """
    value = text.strip().lower()
    if value.startswith(_PREFIX):
        value = value[len(_PREFIX) :]
    if not _HEX_DIGEST.match(value):
        raise KeyConfigurationError(
            f"{where}: an entry is not a SHA-256 digest (64 hex digits, optionally "
            "'sha256:<hex>'); if it is a raw key, configure the digest of it instead "
            "(the entry itself is not shown)"
        )
    return value.encode("ascii")


def digests_from_text(text: str, where: str) -> tuple[bytes, ...]:
    """Digests separated by commas or newlines; blank entries and '#' comments are skipped."""
    found: list[bytes] = []
    for number, line in enumerate(text.splitlines(), start=1):
        content = line.split("#", 1)[0]
        for item in content.split(","):
            if item.strip():
                found.append(parse_digest(item, f"{where} line {number}"))
    return tuple(found)


def key_ring(settings: Settings) -> KeyRing:
    """The key ring from WINDVANE_API_KEYS and WINDVANE_API_KEYS_FILE (both may be given)."""
    digests = list(digests_from_text(settings.api_keys, "WINDVANE_API_KEYS"))
    if settings.api_keys_file is not None:
        path = Path(settings.api_keys_file)
        try:
            text = path.read_text(encoding="utf-8")
        except OSError as exc:
            raise KeyConfigurationError(
                f"WINDVANE_API_KEYS_FILE: cannot read {str(path)!r}: {exc.strerror}"
            ) from exc
        file_digests = digests_from_text(text, f"WINDVANE_API_KEYS_FILE {str(path)!r}")
        if not file_digests:
            # An empty file must not silently leave the service open.
            raise KeyConfigurationError(
                f"WINDVANE_API_KEYS_FILE: {str(path)!r} holds no key digest"
            )
        digests.extend(file_digests)
    return KeyRing(tuple(dict.fromkeys(digests)), protect_metrics=settings.protect_metrics)


def route_path(scope: Scope) -> str:
    """The path the routes see: without the gateway's prefix (ASGI root_path) when present."""
    path = str(scope.get("path", ""))
    root = str(scope.get("root_path", "") or "")
    if root and (path == root or path.startswith(root + "/")):
        return path[len(root) :] or "/"
    return path


def bearer_token(scope: Scope) -> str | None:
    """The token of an `Authorization: Bearer <token>` header, or None."""
    scheme, _, token = header(scope, b"authorization").strip().partition(" ")
    token = token.strip()
    return token if scheme.lower() == "bearer" and token else None


class ApiKeyMiddleware:
    """Refuse requests to protected paths without an accepted key: 401 problem+json."""

    def __init__(self, app: ASGIApp, ring: KeyRing) -> None:
        self.app = app
        self.ring = ring

    async def __call__(self, scope: Scope, receive: Receive, send: Send) -> None:
        if scope["type"] != "http" or not self.ring.protects(route_path(scope)):
            await self.app(scope, receive, send)
            return
        token = bearer_token(scope)
        if token is not None and self.ring.accepts(token):
            await self.app(scope, receive, send)
            return
        # RFC 6750 section 3: no error code when no credentials were sent at all.
        if token is None:
            challenge, detail = 'Bearer realm="windvane"', "an API key is required"
        else:
            challenge = 'Bearer realm="windvane", error="invalid_token"'
            detail = "the API key is not accepted"
        response = problem_response(
            401,
            "unauthorized",
            f"{detail}: send `Authorization: Bearer <key>`",
            Request(scope),
            title="Unauthorized",
            errors=[{"field": "authorization", "message": detail}],
            headers={"WWW-Authenticate": challenge},
        )
        await response(scope, receive, send)


def _with_security(app: FastAPI, ring: KeyRing) -> Callable[[], dict[str, Any]]:
    """An `app.openapi` that declares the bearer scheme on every protected operation."""
    build = app.openapi

    def openapi() -> dict[str, Any]:
        if app.openapi_schema:
            return app.openapi_schema
        schema = build()
        components = schema.setdefault("components", {})
        components.setdefault("securitySchemes", {})[SCHEME_NAME] = {
            "type": "http",
            "scheme": "bearer",
            "description": "An API key; the service stores only its SHA-256 digest.",
        }
        problem = {"$ref": "#/components/schemas/Problem"}
        has_problem = "Problem" in components.get("schemas", {})
        for path, operations in schema.get("paths", {}).items():
            if not ring.protects(path):
                continue
            for operation in operations.values():
                operation["security"] = [{SCHEME_NAME: []}]
                content = {PROBLEM_MEDIA_TYPE: {"schema": problem}} if has_problem else {}
                operation.setdefault("responses", {})["401"] = {
                    "description": "Missing or unaccepted API key",
                    "content": content,
                }
        app.openapi_schema = schema
        return schema

    return openapi


def install_api_keys(app: FastAPI, settings: Settings) -> KeyRing:
    """Check keys on protected paths when any are configured; a no-op otherwise."""
    ring = key_ring(settings)
    if ring.enabled:
        app.add_middleware(ApiKeyMiddleware, ring=ring)
        app.openapi = _with_security(app, ring)  # type: ignore[method-assign]
    return ring
