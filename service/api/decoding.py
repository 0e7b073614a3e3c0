"""JSON request bodies decoded by a faster parser, so a large body holds the loop briefly.

FastAPI decodes a JSON body with ``json.loads`` on the event loop. Any decoder holds the GIL
for the whole call, so a thread would not free the loop; pydantic-core's decoder takes half
the time of ``json.loads`` on a body of 100,000 long numbers and timestamps. Whatever it
refuses (a lone surrogate, UTF-16, a real syntax error) is decoded again by ``json.loads``,
so what is accepted and the 400 naming the byte offset are exactly as before. A batch body
(tens of MB, half a second to decode at once) is decoded one item at a time in a thread,
which lets the loop take the GIL between items. Figures: tests/benchmarks/RESULTS.md.
"""

from __future__ import annotations

import json
import re
from collections.abc import Callable, Coroutine
from typing import Any

from fastapi import Request, Response
from fastapi.routing import APIRoute
from pydantic_core import from_json


def decode(raw: bytes) -> Any:
    """``json.loads(raw)``, faster: the same values for every body ``json.loads`` accepts."""
    try:
        return from_json(raw, cache_strings="keys")
    except ValueError:
        return json.loads(raw)


_DECODER = json.JSONDecoder()
_SPACE = re.compile(r"[ \t\n\r]*")


def decode_batch(raw: bytes, array: str = "requests") -> Any:
    """``json.loads(raw)`` for an object whose ``array`` member is decoded item by item (call
    it in a thread); anything else is decoded whole, errors included."""
    try:
        found = _object(raw.decode("utf-8"), array)
    except (ValueError, RecursionError):
        found = None
    return decode(raw) if found is None else found


def _object(text: str, array: str) -> dict[str, Any] | None:
    """A JSON object spanning ``text``; None where it is not plainly one."""
    out: dict[str, Any] = {}
    i = _skip(text, 0)
    if not text.startswith("{", i):
        return None
    i = _skip(text, i + 1)
    if text.startswith("}", i):
        return out if _skip(text, i + 1) == len(text) else None
    while text.startswith('"', i):
        key, i = _DECODER.raw_decode(text, i)
        i = _skip(text, i)
        if not text.startswith(":", i):
            return None
        i = _skip(text, i + 1)
        value, i = _items(text, i) if key == array else _DECODER.raw_decode(text, i)
        out[key] = value
        i = _skip(text, i)
        if text.startswith("}", i):
            return out if _skip(text, i + 1) == len(text) else None
        if not text.startswith(",", i):
            return None
        i = _skip(text, i + 1)
    return None


def _items(text: str, i: int) -> tuple[Any, int]:
    """The value at ``i``; an array is decoded one item per call."""
    if not text.startswith("[", i):
        return _DECODER.raw_decode(text, i)
    items: list[Any] = []
    i = _skip(text, i + 1)
    if text.startswith("]", i):
        return items, i + 1
    while True:
        item, i = _DECODER.raw_decode(text, i)
        items.append(item)
        i = _skip(text, i)
        if text.startswith("]", i):
            return items, i + 1
        if not text.startswith(",", i):
            raise ValueError("not an array")
        i = _skip(text, i + 1)


def _skip(text: str, i: int) -> int:
    found = _SPACE.match(text, i)
    return found.end() if found is not None else i


class DecodingRequest(Request):
    """A request whose body was read already and whose JSON is decoded by ``decode``."""

    def __init__(self, request: Request, body: bytes) -> None:
        super().__init__(request.scope, request.receive)
        self._read = body
        self._decoded: Any = None
        self._done = False

    async def body(self) -> bytes:
        """The body read by the route (see ``DecodingRoute``)."""
        return self._read

    async def json(self) -> Any:
        """The decoded body, decoded once."""
        if not self._done:
            self._decoded = decode(self._read)
            self._done = True
        return self._decoded


class DecodingRoute(APIRoute):
    """An API route whose handler sees a ``DecodingRequest``.

    The body is read through the request the exception handlers get, so a 400's handler
    that looks at the body finds it rather than waiting for one already consumed."""

    def get_route_handler(self) -> Callable[[Request], Coroutine[Any, Any, Response]]:
        handler = super().get_route_handler()

        async def decoding(request: Request) -> Response:
            return await handler(DecodingRequest(request, await request.body()))

        return decoding
