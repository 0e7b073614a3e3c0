"""Cache entries that prove where they came from: a header line, then the payload.

The cache directory may be a volume shared by replicas, so nothing read from it is trusted
by default. Each entry carries a keyed hash (HMAC-SHA256) over its key, kind, metadata and
payload, made with the secret setting; an entry whose hash does not match (tampered,
truncated, written under another secret) is refused. Fitted models are pickles and are
unpickled only after that check. Finished responses are plain JSON: without a configured
secret they carry a plain SHA-256 checksum, which catches corruption but not forgery, so a
shared volume should always be given a secret.
"""

from __future__ import annotations

import hashlib
import hmac
import json
import secrets
from dataclasses import dataclass
from typing import Any

MAGIC = b"windvane-entry 1\n"
UNSIGNED = "checksum"
KINDS = ("json", "pickle")


class BadEntry(ValueError):
    """The entry is damaged, belongs to another key, or does not authenticate."""


@dataclass(frozen=True)
class Opened:
    """An entry that passed every check."""

    kind: str
    meta: dict[str, Any]
    payload: bytes


class Sealer:
    """Seals and opens entries with one secret (a random one when none is configured).

    With a random secret, pickled entries are readable only by the processes that share it
    (the HTTP processes of one ``windvane serve``); plain JSON entries are written with a
    checksum so that restarts and other processes can still reuse them.
    """

    def __init__(self, secret: bytes | None) -> None:
        self.configured = bool(secret)
        self._secret = secret if secret else secrets.token_bytes(32)
        self.signer = hmac.new(self._secret, b"signer", hashlib.sha256).hexdigest()[:16]

    def seal(self, digest: str, kind: str, payload: bytes, meta: dict[str, Any]) -> bytes:
        """The bytes of an entry for ``payload`` under the key ``digest``."""
        signer = self.signer if self.configured or kind != "json" else UNSIGNED
        head = _head(digest, kind, meta, signer)
        header = {"key": digest, "kind": kind, "meta": meta, "signer": signer}
        header["mac"] = self._mac(signer, head, payload)
        return MAGIC + json.dumps(header, sort_keys=True).encode() + b"\n" + payload

    def open(self, digest: str, data: bytes) -> Opened:
        """The checked entry; BadEntry for anything that does not verify."""
        if not data.startswith(MAGIC):
            raise BadEntry("not a cache entry")
        line, newline, payload = data[len(MAGIC) :].partition(b"\n")
        if not newline:
            raise BadEntry("truncated header")
        try:
            header = json.loads(line)
            kind, meta, signer, mac = (header[k] for k in ("kind", "meta", "signer", "mac"))
            owner = header["key"]
        except (ValueError, KeyError, TypeError) as exc:
            raise BadEntry(f"unreadable header ({type(exc).__name__})") from None
        if owner != digest:
            raise BadEntry("the entry belongs to another key")
        if kind not in KINDS or not isinstance(meta, dict) or not isinstance(mac, str):
            raise BadEntry("malformed header")
        if signer == UNSIGNED and (self.configured or kind != "json"):
            raise BadEntry("an unsigned entry where a signed one is required")
        if signer not in (UNSIGNED, self.signer):
            raise BadEntry("signed under another secret")
        expected = self._mac(signer, _head(digest, kind, meta, signer), payload)
        if not hmac.compare_digest(expected, mac):
            raise BadEntry("the entry does not authenticate (damaged or tampered with)")
        return Opened(kind, meta, payload)

    def _mac(self, signer: str, head: bytes, payload: bytes) -> str:
        if signer == UNSIGNED:
            return hashlib.sha256(head + payload).hexdigest()
        return hmac.new(self._secret, head + payload, hashlib.sha256).hexdigest()


def _head(digest: str, kind: str, meta: dict[str, Any], signer: str) -> bytes:
    """What the hash covers besides the payload, length-delimited by the newline."""
    fields = {"key": digest, "kind": kind, "meta": meta, "signer": signer}
    return json.dumps(fields, sort_keys=True, separators=(",", ":")).encode() + b"\n"
