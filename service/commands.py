"""What each `windvane` command does: serve, openapi, demo, answering one request body (in
process or by a running service) and batch. The parser and the entry point are in cli.py."""

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


def serve(args: argparse.Namespace) -> int:
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


def openapi(args: argparse.Namespace) -> int:
    from service.api.openapi import schema_text

    text = schema_text()
    if args.path == "-":
        sys.stdout.write(text)
    else:
        Path(args.path).write_text(text, encoding="utf-8")
    return 0


def demo(args: argparse.Namespace) -> int:
    from service import demo

    if args.name == "list":
        for name, make in demo.SCENARIO.items():
            sys.stdout.write(f"{name}\t{make().label}\n")
        return 0
    if args.name not in demo.SCENARIO:
        raise CommandError(f"unknown demo series {args.name!r}; try `windvane demo list`", 2)
    if args.horizon is not None:
        check_options(horizon=args.horizon)
    body: dict[str, Any] = demo.request_body(args.name, args.kind, horizon=args.horizon)
    sys.stdout.write(json.dumps(body, indent=None) + "\n")
    return 0


class CommandError(Exception):
    """A failure the command reports as one line on stderr, with its exit status."""

    def __init__(self, message: str, status: int = 1) -> None:
        super().__init__(message)
        self.status = status


OPTION_NAMES = {"horizon": "--horizon", "coverage": "--coverage", "model": "--model"}


def check_options(
    horizon: int | None = None,
    coverage: list[float] | None = None,
    model: str | dict[str, Any] | None = None,
) -> None:
    """Check command-line options exactly as POST /v1/forecasts checks the same fields."""
    from pydantic import ValidationError

    from service.api.problems import validation_problem
    from service.api.schemas.forecasts import ForecastRequest
    from service.api.tasks import forecast_task
    from service.config import Settings
    from service.core.errors import WindvaneError

    given = {"horizon": horizon, "coverage": coverage, "model": model}
    body = {
        "series": {"start": "2000-01-01", "frequency": "D", "values": [1.0, 2.0, 3.0]},
        "horizon": 1,
        **{k: v for k, v in given.items() if v is not None},
    }
    try:
        forecast_task(ForecastRequest.model_validate(body), Settings())
    except ValidationError as exc:
        first = validation_problem(exc.errors())[3][0]
        raise CommandError(f"{_option(first['field'])}: {first['message']}", 2) from None
    except WindvaneError as exc:
        found = exc.problems[0]
        raise CommandError(f"{_option(found.field)}: {found.message}", 2) from None


def _option(field: str) -> str:
    head = field.split(".")[0].split("[")[0]
    return OPTION_NAMES.get(head, field)


def _read_body(file: str) -> str:
    if file == "-":
        return sys.stdin.read()
    try:
        return Path(file).read_text(encoding="utf-8")
    except FileNotFoundError:
        raise CommandError(f"no such file: {file}") from None
    except (OSError, UnicodeDecodeError) as exc:
        raise CommandError(f"cannot read {file}: {exc}") from None


def _problem_line(problem: dict[str, Any]) -> str:
    """A problem as one line of JSON, for stderr."""
    return json.dumps(problem, separators=(",", ":"), ensure_ascii=False) + "\n"


def answer(args: argparse.Namespace, path: str) -> int:
    """Answer one request body from a file or stdin: in process, or by a service at --url."""
    raw = _read_body(args.file)
    if args.url:
        return remote(args.url, path, raw)
    from pydantic import ValidationError

    from service.api.local import answer
    from service.api.problems import domain_errors, validation_problem
    from service.core.errors import WindvaneError

    try:
        body = answer(path, raw)
    except ValidationError as exc:
        # The same status, field paths and messages as the HTTP problems.
        status, _, detail, errors = validation_problem(exc.errors(), raw.encode("utf-8", "replace"))
        sys.stderr.write(_problem_line({"status": status, "detail": detail, "errors": errors}))
        return 1
    except WindvaneError as exc:
        report = {"status": 422, "detail": exc.message, "errors": domain_errors(exc)}
        sys.stderr.write(_problem_line(report))
        return 1
    sys.stdout.write(json.dumps(body, indent=2) + "\n")
    return 0


def remote(url: str, path: str, raw: str) -> int:
    """POST the body to a running service; a problem goes to stderr as one line."""
    import urllib.error
    import urllib.request

    if not url.startswith(("http://", "https://")):
        raise CommandError(f"--url must start with http:// or https://, got {url!r}", 2)
    request = urllib.request.Request(
        url.rstrip("/") + path,
        data=raw.encode("utf-8"),
        headers={"content-type": "application/json", "accept": "application/json"},
        method="POST",
    )
    key = os.environ.get("WINDVANE_CLIENT_KEY")
    if key:
        request.add_header("authorization", f"Bearer {key}")
    try:
        with urllib.request.urlopen(request, timeout=REMOTE_SECONDS) as reply:
            text = reply.read().decode("utf-8")
    except urllib.error.HTTPError as exc:
        text = exc.read().decode("utf-8", "replace")
        try:
            problem = json.loads(text)
        except ValueError:
            problem = {"status": exc.code, "detail": text[:200]}
        sys.stderr.write(_problem_line(problem))
        return 1
    except (urllib.error.URLError, OSError) as exc:
        reason = getattr(exc, "reason", exc)
        raise CommandError(f"cannot reach {url}: {reason}") from None
    sys.stdout.write(json.dumps(json.loads(text), indent=2) + "\n")
    return 0


REMOTE_SECONDS = 300


def batch(args: argparse.Namespace) -> int:
    from pydantic import SecretStr

    from service import batch
    from service.config import Settings
    from service.runtime.fanout import scheduler_address

    model: str | dict[str, Any] = args.model
    if args.model.lstrip().startswith("{"):
        try:
            model = json.loads(args.model)
        except ValueError as exc:
            raise CommandError(f"--model: not valid JSON ({exc})", 2) from None
    elif args.model != "auto":
        model = {"family": args.model}
    coverage = args.coverage or [0.8, 0.95]
    check_options(horizon=args.horizon, coverage=coverage, model=model)
    if args.workers < 1:
        raise CommandError("--workers: must be at least 1", 2)
    output = Path(args.output)
    outputs = batch.Outputs(
        output, Path(args.summary) if args.summary else batch.summary_path(output)
    )
    options = batch.Options(
        horizon=args.horizon,
        coverage=tuple(sorted(coverage)),
        model=model,
        frequency=args.frequency,
        columns=batch.Columns(args.id_column, args.time_column, args.value_column),
    )
    settings = Settings()
    if settings.cache_secret is None:
        # The run's workers share disk entries only under one sealing secret: give them one
        # (set WINDVANE_CACHE_SECRET to share across runs and with servers).
        settings = settings.model_copy(update={"cache_secret": SecretStr(secrets.token_hex(32))})
    try:
        report = batch.run(
            Path(args.input),
            outputs,
            options,
            settings,
            workers=args.workers,
            scheduler=scheduler_address(args.scheduler),
            progress=sys.stderr.isatty() and not args.quiet,
        )
    except batch.RunFailed as exc:
        raise CommandError(str(exc)) from None
    batch.print_report(report, outputs)
    return 0
