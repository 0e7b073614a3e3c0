"""The `windvane` command: serve, forecast, diagnose, openapi, demo."""

from __future__ import annotations

import argparse
import json
import math
import os
import secrets
import signal
import sys
from pathlib import Path
from types import FrameType
from typing import Any


def _exit_after_drain(signum: int, frame: FrameType | None) -> None:
    """A SIGTERM stop is the expected end of a server, so its exit status is success."""
    raise SystemExit(0)


def _serve(args: argparse.Namespace) -> int:
    import uvicorn

    from service.config import Settings

    overrides = {
        k: v
        for k, v in {"host": args.host, "port": args.port, "workers": args.workers}.items()
        if v is not None
    }
    settings = Settings(**overrides)
    if settings.workers > 1 and settings.cache_secret is None:
        # The HTTP processes share fitted models on disk only under one sealing secret; they
        # inherit this one (a restart makes another: configure one to keep entries across).
        os.environ["WINDVANE_CACHE_SECRET"] = secrets.token_hex(32)
    if settings.workers > 1:
        from service.runtime.telemetry import MetricsDirectoryError, prepare_multiprocess

        # Must precede the worker processes: client_python picks its storage at import.
        try:
            prepare_multiprocess(settings.metrics_dir)
        except MetricsDirectoryError as exc:
            sys.stderr.write(f"windvane serve: {exc}\n")
            return 2
    # uvicorn drains, then re-raises SIGTERM with the handler found here: make that exit 0.
    signal.signal(signal.SIGTERM, _exit_after_drain)
    uvicorn.run(
        "service.api.boot:create_app",
        factory=True,
        host=settings.host,
        port=settings.port,
        workers=settings.workers,
        loop="auto",
        http="auto",
        timeout_graceful_shutdown=math.ceil(settings.shutdown_grace_seconds),
        # The h11 parser's own cap (httptools has none; the app's middleware caps both).
        h11_max_incomplete_event_size=settings.max_header_bytes,
        log_level=settings.log_level,
        # The JSON request log (runtime/logs.py) is the access log: a second line per request
        # cost CPU on every cache hit.
        access_log=False,
    )
    return 0


def _openapi(args: argparse.Namespace) -> int:
    from service.api.openapi import schema_text

    text = schema_text()
    if args.path == "-":
        sys.stdout.write(text)
    else:
        Path(args.path).write_text(text, encoding="utf-8")
    return 0


def _demo(args: argparse.Namespace) -> int:
    from service import demo

    if args.name == "list":
        for name, make in demo.SCENARIO.items():
            sys.stdout.write(f"{name}\t{make().label}\n")
        return 0
    if args.name not in demo.SCENARIO:
        sys.stderr.write(f"unknown demo series {args.name!r}; try `windvane demo list`\n")
        return 2
    body: dict[str, Any] = demo.request_body(args.name, args.kind, horizon=args.horizon)
    sys.stdout.write(json.dumps(body, indent=None) + "\n")
    return 0


def _local(args: argparse.Namespace, path: str) -> int:
    """Answer one request in this process (no server, no pool): JSON from a file or stdin."""
    from pydantic import ValidationError

    from service.api.local import answer
    from service.api.problems import domain_errors, validation_problem
    from service.core.errors import WindvaneError

    raw = sys.stdin.read() if args.file == "-" else Path(args.file).read_text(encoding="utf-8")
    try:
        body = answer(path, raw)
    except ValidationError as exc:
        # The same status, field paths and messages as the HTTP problems.
        status, _, detail, errors = validation_problem(exc.errors())
        report = {"status": status, "detail": detail, "errors": errors}
        sys.stderr.write(json.dumps(report, indent=2) + "\n")
        return 1
    except WindvaneError as exc:
        report = {"status": 422, "detail": exc.message, "errors": domain_errors(exc)}
        sys.stderr.write(json.dumps(report, indent=2) + "\n")
        return 1
    sys.stdout.write(json.dumps(body, indent=2) + "\n")
    return 0


def build_parser() -> argparse.ArgumentParser:
    """The command-line interface."""
    parser = argparse.ArgumentParser(prog="windvane", description=__doc__)
    sub = parser.add_subparsers(dest="command", required=True)
    serve = sub.add_parser("serve", help="start the HTTP service")
    serve.add_argument("--host", default=None, help="bind address (default 127.0.0.1)")
    serve.add_argument("--port", type=int, default=None, help="port (default 8000)")
    serve.add_argument("--workers", type=int, default=None, help="server processes")
    serve.set_defaults(run=_serve)
    schema = sub.add_parser("openapi", help="write the OpenAPI schema")
    schema.add_argument("path", help="output file, or - for stdout")
    schema.set_defaults(run=_openapi)
    demo = sub.add_parser("demo", help="print a demo request body")
    demo.add_argument("name", help="scenario series name (see `windvane demo list`)")
    demo.add_argument("--horizon", type=int, default=None)
    demo.add_argument(
        "--kind",
        choices=("forecast", "diagnostics", "backtest"),
        default="forecast",
        help="which endpoint the body is for",
    )
    demo.set_defaults(run=_demo)
    for name, path in (("forecast", "/v1/forecasts"), ("diagnose", "/v1/diagnostics")):
        cmd = sub.add_parser(name, help=f"answer one {path} request in process")
        cmd.add_argument("file", nargs="?", default="-", help="request JSON (default stdin)")
        cmd.set_defaults(run=lambda a, p=path: _local(a, p))
    return parser


def main(argv: list[str] | None = None) -> int:
    """Entry point of the console script."""
    args = build_parser().parse_args(argv)
    return int(args.run(args))


if __name__ == "__main__":
    raise SystemExit(main())
