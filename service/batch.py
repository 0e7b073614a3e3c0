"""`windvane batch INPUT OUTPUT`: forecasts for every series of a long table, file to file.

The input is long format (one row per series and timestamp) in CSV or Parquet; each series
becomes one POST /v1/forecasts request answered by ``api.batch_items.answer_entry`` on loky
workers or a Dask cluster. Finished series are appended to journals beside the outputs as
they complete, so an interrupted run resumes where it stopped; at the end the forecasts and
the per-series summary are written in input order (so two runs compare line by line) and
the portfolio summary is printed.
"""

from __future__ import annotations

import contextlib
import os
import sys
from collections.abc import Iterator, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import pandas as pd

from service.api.batch_items import answer_entry, failure_problem, outcome
from service.config import Settings
from service.runtime.fanout import fan_out
from service.runtime.portfolio import portfolio, portfolio_lines, summary_row

SUMMARY_COLUMNS = (
    "series_id",
    "status",
    "model",
    "skill_over_naive",
    "verdict",
    "warnings",
    "problem",
)

EXTRA_NEEDED = "{what} need the batch extra: pip install 'windvane[batch]'"


class RunFailed(Exception):
    """The run itself cannot go on (unreadable input, missing columns, no cluster)."""


@dataclass(frozen=True)
class Columns:
    """The input's column names."""

    series: str = "series_id"
    time: str = "timestamp"
    value: str = "value"


@dataclass(frozen=True)
class Options:
    """What every series is asked: the POST /v1/forecasts fields shared by all of them."""

    horizon: int
    coverage: tuple[float, ...]
    model: str | dict[str, Any] = "auto"
    frequency: str | None = None
    columns: Columns = field(default_factory=Columns)


def coverage_label(level: float) -> str:
    """0.8 -> "80", 0.975 -> "97.5": the suffix of the interval columns."""
    return f"{level * 100:.10g}"


def forecast_columns(coverage: Sequence[float]) -> list[str]:
    """series_id, timestamp, point, then lower_/upper_ per level."""
    bounds = [f"{side}_{coverage_label(c)}" for c in coverage for side in ("lower", "upper")]
    return ["series_id", "timestamp", "point", *bounds]


def read_long(path: Path, columns: Columns) -> pd.DataFrame:
    """The input table with its three columns, ids and timestamps as text."""
    try:
        if path.suffix.lower() == ".parquet":
            frame = pd.read_parquet(path, columns=[columns.series, columns.time, columns.value])
        else:
            frame = pd.read_csv(
                path,
                usecols=[columns.series, columns.time, columns.value],
                dtype={columns.series: str, columns.time: str},
                keep_default_na=False,
                na_values={columns.value: ["", "NA", "NaN", "nan", "null"]},
            )
    except FileNotFoundError:
        raise RunFailed(f"no such input file: {path}") from None
    except ImportError:
        raise RunFailed(EXTRA_NEEDED.format(what="Parquet files")) from None
    except (ValueError, KeyError, OSError) as exc:
        raise RunFailed(f"cannot read {path}: {_first_line(exc)}") from None
    frame = frame.rename(
        columns={columns.series: "series_id", columns.time: "timestamp", columns.value: "value"}
    )
    frame["series_id"] = frame["series_id"].astype(str)
    if not pd.api.types.is_string_dtype(frame["timestamp"]):
        frame["timestamp"] = [_iso(t) for t in frame["timestamp"]]
    return frame


def _iso(value: Any) -> Any:
    return value.isoformat() if hasattr(value, "isoformat") else str(value)


def _first_line(exc: BaseException) -> str:
    text = str(exc).strip().splitlines()
    return text[0] if text else type(exc).__name__


def entries(frame: pd.DataFrame, options: Options) -> Iterator[tuple[str, dict[str, Any]]]:
    """(series id, POST /v1/forecasts body with the id) per series, in order of appearance."""
    for ident, rows in frame.groupby("series_id", sort=False):
        values = rows["value"].to_numpy(dtype=object)
        series: dict[str, Any] = {
            "timestamps": rows["timestamp"].tolist(),
            "values": [None if _missing(v) else _number(v) for v in values],
        }
        if options.frequency:
            series["frequency"] = options.frequency
        yield (
            str(ident),
            {
                "id": str(ident),
                "series": series,
                "horizon": options.horizon,
                "coverage": list(options.coverage),
                "model": options.model,
            },
        )


def _missing(value: Any) -> bool:
    return value is None or (isinstance(value, float) and value != value)


def _number(value: Any) -> Any:
    """Numbers as floats; anything else is left for the schema to name (`values[i]`)."""
    if isinstance(value, (int, float)) and not isinstance(value, bool):
        return float(value)
    with contextlib.suppress(TypeError, ValueError):
        return float(value)
    return value


@dataclass
class Outputs:
    """The forecast and summary files, their journals, and the series already finished."""

    forecasts: Path
    summary: Path

    @property
    def journals(self) -> tuple[Path, Path]:
        """Rows appended during a run, merged into the outputs at its end."""
        return _journal(self.forecasts), _journal(self.summary)

    def finished(self) -> set[str]:
        """Series with forecasts in OUTPUT or in its journal: a resumed run skips them."""
        done: set[str] = set()
        for path in (self.forecasts, self.journals[0]):
            frame = _read_table(path)
            if frame is not None and "series_id" in frame:
                done.update(frame["series_id"].astype(str))
        return done

    def append(self, result: dict[str, Any], coverage: Sequence[float]) -> dict[str, Any]:
        """Journal one finished series: its summary row, then its forecast rows."""
        row = summary_row(result)
        _append_csv(self.journals[1], pd.DataFrame([row], columns=list(SUMMARY_COLUMNS)))
        forecast = result.get("forecast")
        if forecast:
            _append_csv(self.journals[0], forecast_rows(row["series_id"], forecast, coverage))
        return row

    def finish(self, order: Sequence[str], coverage: Sequence[float]) -> list[dict[str, Any]]:
        """Merge outputs and journals in input order; the summary rows of every series."""
        rank = {ident: i for i, ident in enumerate(order)}
        forecasts = _merged(self.forecasts, self.journals[0], forecast_columns(coverage))
        summary = _merged(self.summary, self.journals[1], list(SUMMARY_COLUMNS))
        summary = summary.drop_duplicates("series_id", keep="last")
        for frame, path in ((forecasts, self.forecasts), (summary, self.summary)):
            position = frame["series_id"].map(rank).fillna(len(rank))
            frame = frame.assign(_rank=position).sort_values("_rank", kind="stable")
            _write_table(frame.drop(columns="_rank"), path)
        for journal in self.journals:
            journal.unlink(missing_ok=True)
        return [
            {k: (None if _missing(v) else v) for k, v in r.items()}
            for r in summary.to_dict("records")
        ]


def forecast_rows(ident: str, forecast: dict[str, Any], coverage: Sequence[float]) -> pd.DataFrame:
    """One row per forecast step, bounds in the order of ``coverage``."""
    data: dict[str, Any] = {
        "series_id": ident,
        "timestamp": forecast["timestamps"],
        "point": forecast["point"],
    }
    by_level = {round(i["coverage"], 12): i for i in forecast["intervals"]}
    for level in coverage:
        interval = by_level[round(level, 12)]
        data[f"lower_{coverage_label(level)}"] = interval["lower"]
        data[f"upper_{coverage_label(level)}"] = interval["upper"]
    return pd.DataFrame(data, columns=forecast_columns(coverage))


def _journal(path: Path) -> Path:
    return path.with_name(path.name + ".partial.csv")


def _append_csv(path: Path, frame: pd.DataFrame) -> None:
    new = not path.exists() or path.stat().st_size == 0
    with path.open("a", encoding="utf-8", newline="") as out:
        out.write(frame.to_csv(index=False, header=new))
        out.flush()


def _read_table(path: Path) -> pd.DataFrame | None:
    if not path.exists() or path.stat().st_size == 0:
        return None
    try:
        if path.suffix.lower() == ".parquet":
            return pd.read_parquet(path)
        _drop_torn_line(path)
        return pd.read_csv(path, dtype={"series_id": str, "timestamp": str})
    except (ValueError, OSError) as exc:
        raise RunFailed(f"cannot resume from {path}: {_first_line(exc)}") from None


def _drop_torn_line(path: Path) -> None:
    """An interrupted append can leave half a line at the end: cut it off."""
    data = path.read_bytes()
    if data and not data.endswith(b"\n"):
        path.write_bytes(data[: data.rfind(b"\n") + 1])


def _merged(done: Path, journal: Path, columns: list[str]) -> pd.DataFrame:
    parts = [f for f in (_read_table(done), _read_table(journal)) if f is not None]
    if not parts:
        return pd.DataFrame(columns=columns)
    return pd.concat(parts, ignore_index=True)


def _write_table(frame: pd.DataFrame, path: Path) -> None:
    """Write next to the target and rename, so OUTPUT is never half written."""
    temporary = path.with_name(f".{path.name}.{os.getpid()}.tmp")
    if path.suffix.lower() == ".parquet":
        frame.to_parquet(temporary, index=False)
    else:
        frame.to_csv(temporary, index=False)
    temporary.replace(path)


def summary_path(output: Path) -> Path:
    """forecasts.csv -> forecasts.summary.csv (the same format as OUTPUT)."""
    return output.with_name(f"{output.stem}.summary{output.suffix or '.csv'}")


@dataclass(frozen=True)
class Report:
    """What a run did: series answered and failed now, skipped as done, and the portfolio."""

    ran: int
    failed: int
    skipped: int
    portfolio: dict[str, Any]


def run(
    source: Path,
    outputs: Outputs,
    options: Options,
    settings: Settings,
    *,
    workers: int = 1,
    scheduler: str | None = None,
    progress: bool = False,
) -> Report:
    """Forecast every series of ``source`` not yet in the outputs; merge; summarise."""
    frame = read_long(source, options.columns)
    order = list(dict.fromkeys(frame["series_id"]))
    finished = outputs.finished()
    todo = [
        (index, body)
        for index, (ident, body) in enumerate(entries(frame, options))
        if ident not in finished
    ]
    del frame
    items = ((body, index, settings) for index, body in todo)

    def lost(item: tuple[Any, ...], exc: BaseException) -> dict[str, Any]:
        body, index, _ = item
        return outcome(index, body["id"], problem_body=failure_problem(exc))

    from tqdm import tqdm

    failed = 0
    with tqdm(total=len(todo), unit="series", disable=not progress, file=sys.stderr) as bar:
        try:
            # No more processes than series: each one costs seconds of imports to start.
            used = min(workers, len(todo))
            for result in fan_out(
                answer_entry, items, workers=used, scheduler=scheduler, on_error=lost
            ):
                outputs.append(result, options.coverage)
                failed += result["status"] != 200
                bar.update(1)
        except ImportError:
            raise RunFailed(EXTRA_NEEDED.format(what="a Dask cluster")) from None
        except OSError as exc:
            raise RunFailed(f"the run stopped: {_first_line(exc)}") from None
    rows = outputs.finish(order, options.coverage)
    return Report(len(todo), failed, len(order) - len(todo), portfolio(rows))


def print_report(report: Report, outputs: Outputs) -> None:
    """The portfolio summary on stdout; failures counted on stderr."""
    for line in portfolio_lines(report.portfolio):
        sys.stdout.write(line + "\n")
    sys.stdout.write(
        f"this run: {report.ran} series forecast, {report.skipped} already done; "
        f"forecasts in {outputs.forecasts}, summary in {outputs.summary}\n"
    )
    if report.failed:
        sys.stderr.write(
            f"{report.failed} series failed in this run; their problems are in {outputs.summary}\n"
        )
