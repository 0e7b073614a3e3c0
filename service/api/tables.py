"""CSV tables of the JSON answers, for reporting systems: one row per forecast step, per
backtest model and step, or per autocorrelation lag. The numbers are the JSON answer's own."""

from __future__ import annotations

import csv
import io
from collections.abc import Iterable, Sequence
from typing import Any


def _level(coverage: float) -> str:
    return f"{coverage * 100:g}".replace(".", "_")


def _cell(value: Any) -> str:
    if value is None:
        return ""
    if isinstance(value, float):
        return repr(value)
    return str(value)


def _write(header: Sequence[str], rows: Iterable[Sequence[Any]]) -> bytes:
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\n")
    writer.writerow(header)
    for row in rows:
        writer.writerow([_cell(v) for v in row])
    return buffer.getvalue().encode("utf-8")


def forecast_table(answer: dict[str, Any]) -> bytes:
    """``timestamp, point, lower_80, upper_80, ...``: one pair of bounds per level."""
    intervals = answer.get("intervals", [])
    header = ["timestamp", "point"]
    for interval in intervals:
        level = _level(float(interval["coverage"]))
        header += [f"lower_{level}", f"upper_{level}"]
    rows = []
    for i, stamp in enumerate(answer.get("timestamps", [])):
        row: list[Any] = [stamp, answer["point"][i]]
        for interval in intervals:
            row += [interval["lower"][i], interval["upper"][i]]
        rows.append(row)
    return _write(header, rows)


def backtest_table(answer: dict[str, Any]) -> bytes:
    """One row per model and step (step ``all`` for the pooled scores)."""
    levels = [float(c) for c in answer.get("coverage", [])]
    header = ["model", "step", "mae", "rmse", "mase", "smape"]
    for level in levels:
        header += [f"observed_coverage_{_level(level)}", f"msis_{_level(level)}"]
    rows: list[list[Any]] = []
    for model in answer.get("models", []):
        scored = [("all", model.get("overall"))] + [(s["step"], s) for s in model.get("steps", [])]
        for step, scores in scored:
            if scores is None:
                continue
            row: list[Any] = [model["label"], step]
            row += [scores.get(k) for k in ("mae", "rmse", "mase", "smape")]
            observed = scores.get("observed_coverage", scores.get("coverage", {})) or {}
            msis = scores.get("msis", {}) or {}
            for level in levels:
                row += [_by_level(observed, level), _by_level(msis, level)]
            rows.append(row)
    return _write(header, rows)


def _by_level(values: dict[str, Any], level: float) -> Any:
    for key, value in values.items():
        try:
            if abs(float(key) - level) < 1e-9:
                return value
        except ValueError:
            continue
    return None


def correlogram_table(answer: dict[str, Any]) -> bytes:
    """``lag, acf, pacf, band_lower, band_upper`` of the series' correlogram."""
    section = answer.get("autocorrelation", {}).get("series", {})
    header = ["lag", "acf", "pacf", "band_lower", "band_upper"]
    if not section.get("applicable"):
        return _write(header, [])
    band = section["band"]
    rows = [
        [lag, section["acf"][i], section["pacf"][i], band["lower"], band["upper"]]
        for i, lag in enumerate(section["lags"])
    ]
    return _write(header, rows)
