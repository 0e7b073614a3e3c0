"""The `windvane` command: serve, forecast, diagnose, batch, openapi, demo."""

from __future__ import annotations

import argparse
import os
import sys
from typing import Any, NoReturn

from service import commands
from service.commands import CommandError


class _Parser(argparse.ArgumentParser):
    """argparse with its errors as one line (no usage block) and exit status 2."""

    def error(self, message: str) -> NoReturn:
        self.exit(2, f"{self.prog}: error: {message}\n")


def _command(sub: Any, name: str, help_text: str, example: str) -> argparse.ArgumentParser:
    parser: argparse.ArgumentParser = sub.add_parser(
        name,
        help=help_text,
        description=help_text,
        epilog=f"example:\n  {example}",
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    return parser


def build_parser() -> argparse.ArgumentParser:
    """The command-line interface."""
    parser = _Parser(
        prog="windvane",
        description=__doc__,
        epilog="example:\n  windvane demo energy | windvane forecast -",
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    sub = parser.add_subparsers(dest="command", required=True, parser_class=_Parser)
    serve = _command(sub, "serve", "start the HTTP service", "windvane serve --port 8000")
    serve.add_argument("--host", default=None, help="bind address (default 127.0.0.1)")
    serve.add_argument("--port", type=int, default=None, help="port (default 8000)")
    serve.add_argument("--workers", type=int, default=None, help="server processes")
    serve.set_defaults(run=commands.serve)
    schema = _command(
        sub, "openapi", "write the OpenAPI schema", "windvane openapi openapi/openapi.json"
    )
    schema.add_argument("path", help="output file, or - for stdout")
    schema.set_defaults(run=commands.openapi)
    demo = _command(
        sub, "demo", "print a demo request body", "windvane demo energy --horizon 6 --kind backtest"
    )
    demo.add_argument("name", help="scenario series name (see `windvane demo list`)")
    demo.add_argument("--horizon", type=int, default=None, help="steps ahead (as `horizon`)")
    demo.add_argument(
        "--kind",
        choices=("forecast", "diagnostics", "backtest"),
        default="forecast",
        help="which endpoint the body is for",
    )
    demo.set_defaults(run=commands.demo)
    for name, path, kind in (
        ("forecast", "/v1/forecasts", "forecast"),
        ("diagnose", "/v1/diagnostics", "diagnostics"),
    ):
        cmd = _command(
            sub,
            name,
            f"answer one {path} request body, in process or by a running service (--url)",
            f"windvane demo energy --kind {kind} | windvane {name} - --url http://127.0.0.1:8000",
        )
        cmd.add_argument("file", nargs="?", default="-", help="request JSON (default stdin)")
        cmd.add_argument(
            "--url",
            default=None,
            help="base URL of a running service to send the request to (key from "
            "WINDVANE_CLIENT_KEY, if any) instead of computing here",
        )
        cmd.set_defaults(run=lambda a, p=path: commands.answer(a, p))
    _add_batch(sub)
    return parser


def _add_batch(sub: Any) -> None:
    cmd = _command(
        sub,
        "batch",
        "forecast every series of a long CSV or Parquet table into OUTPUT (resumable)",
        "windvane batch sales.csv forecasts.csv --horizon 12 --workers 2",
    )
    cmd.add_argument("input", help="long table: one row per series and timestamp (.csv, .parquet)")
    cmd.add_argument(
        "output",
        help="forecasts in long format (.csv or .parquet); series already in it are skipped",
    )
    cmd.add_argument("--horizon", type=int, required=True, help="steps ahead")
    cmd.add_argument(
        "--coverage",
        type=float,
        nargs="+",
        default=None,
        help="interval levels (default 0.8 0.95): columns lower_80, upper_80, ...",
    )
    cmd.add_argument(
        "--model", default="auto", help="auto (default), a family name, or a specification as JSON"
    )
    cmd.add_argument(
        "--frequency",
        default=None,
        help="step of every series (ISO 8601 or pandas alias); inferred if absent",
    )
    cmd.add_argument("--id-column", default="series_id", help="column of series ids")
    cmd.add_argument("--time-column", default="timestamp", help="column of timestamps")
    cmd.add_argument("--value-column", default="value", help="column of values")
    cmd.add_argument(
        "--summary",
        default=None,
        help="per-series summary table (default OUTPUT's name + .summary)",
    )
    cmd.add_argument(
        "--workers",
        type=int,
        default=os.cpu_count() or 1,
        help="local worker processes (default: the cores)",
    )
    cmd.add_argument(
        "--scheduler",
        default=None,
        help="Dask scheduler tcp://HOST:PORT (or WINDVANE_DASK_SCHEDULER); "
        "runs the series on that cluster instead",
    )
    cmd.add_argument("--quiet", action="store_true", help="no progress bar")
    cmd.set_defaults(run=commands.batch)


def main(argv: list[str] | None = None) -> int:
    """Entry point of the console script: errors are one line on stderr, never a traceback."""
    args = build_parser().parse_args(argv)
    try:
        return int(args.run(args))
    except CommandError as exc:
        sys.stderr.write(f"windvane {args.command}: error: {exc}\n")
        return exc.status
    except KeyboardInterrupt:
        sys.stderr.write(f"windvane {args.command}: interrupted\n")
        return 130
    except Exception as exc:
        message = str(exc).strip().splitlines()
        detail = message[0] if message else ""
        sys.stderr.write(f"windvane {args.command}: error: {type(exc).__name__}: {detail}\n")
        return 1


if __name__ == "__main__":
    raise SystemExit(main())
