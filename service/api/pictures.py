"""What a chart shows and what a table's headers say, drawn from a request and its answer."""

from __future__ import annotations

import math
import re
from typing import Any

from service.runtime import charts

HISTORY_SHOWN = 200  # at most this many past points on a forecast chart
MAX_HEADER_TEXT = 500


def _header_text(text: str) -> str:
    """A header value: printable ASCII, shortened."""
    plain = re.sub(r"[^\x20-\x7e]", "?", text)
    return plain[:MAX_HEADER_TEXT]


def filename(request: dict[str, Any], kind: str, extension: str) -> str:
    name = str(request.get("series", {}).get("name") or "series")
    slug = re.sub(r"[^A-Za-z0-9_-]+", "-", name).strip("-")[:60] or kind
    return f"{slug}-{kind}.{extension}"


def forecast_headers(result: dict[str, Any]) -> list[tuple[bytes, bytes]]:
    """The model, the plain summary and the warning codes, as response headers."""
    out = [
        (b"windvane-model", _header_text(str(result.get("model", {}).get("label", ""))).encode())
    ]
    summary = result.get("summary")
    if summary:
        out.append((b"windvane-summary", _header_text(str(summary)).encode()))
    codes = [str(w.get("code", "")) for w in result.get("warnings", [])]
    out.append((b"windvane-warnings", _header_text(", ".join(codes)).encode()))
    return out


def forecast_picture(request: dict[str, Any], result: dict[str, Any], series: Any) -> Any:
    """The forecast chart's data: the recent history and the answer's forecast."""
    y = series.y.iloc[-HISTORY_SHOWN:]
    label = str(result.get("model", {}).get("label", "forecast"))
    name = str(request.get("series", {}).get("name") or "forecast")
    skill = (result.get("selection") or {}).get("skill_over_naive")
    title = name
    if isinstance(skill, int | float):
        title += f"; skill over naive {skill * 100:+.0f} % in backtests"
    title += f"\nmodel: {label}"
    levels = ", ".join(f"{i['coverage'] * 100:g} %" for i in result.get("intervals", []))
    description = str(result.get("summary") or "") or (
        f"{len(result.get('point', []))} forecast steps of {name} by {label}, "
        f"with {levels} prediction intervals, after {len(y)} points of history."
    )
    return charts.ForecastPicture(
        history_timestamps=[t.isoformat() for t in y.index],
        history_values=[None if math.isnan(v) else float(v) for v in y.to_numpy()],
        timestamps=list(result.get("timestamps", [])),
        point=list(result.get("point", [])),
        intervals=[
            (float(i["coverage"]), list(i["lower"]), list(i["upper"]))
            for i in result.get("intervals", [])
        ],
        title=title[:200],
        description=description[:1000],
    )


def diagnostics_picture(request: dict[str, Any], result: dict[str, Any], series: Any) -> Any:
    """The diagnostics chart's data: the correlograms of the answer, the series to decompose."""
    section = result.get("autocorrelation", {}).get("series", {})
    if not section.get("applicable"):
        raise ValueError("the series is too short for a correlogram chart")
    period = series.seasonal_period
    periods = [round(p) for p in (period if isinstance(period, list | tuple) else [period])]
    name = str(request.get("series", {}).get("name") or "series")
    findings = " ".join(str(f) for f in result.get("findings", []))
    return charts.DiagnosticsPicture(
        acf=list(section["acf"]),
        pacf=list(section["pacf"]),
        band=(float(section["band"]["lower"]), float(section["band"]["upper"])),
        values=[None if math.isnan(v) else float(v) for v in series.y.to_numpy()],
        periods=[p for p in periods if p > 1],
        title=f"{name}: autocorrelation and decomposition"[:200],
        description=(findings or f"Correlograms and decomposition of {name}.")[:1000],
    )
