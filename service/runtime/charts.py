"""Charts for reports: a forecast with its intervals, and the diagnostics' correlograms and
decomposition, rendered with matplotlib's Agg backend in a pool worker (never on the loop).

Windvane's own look, readable in grey scale: history in a dark slate line, the forecast in
a dashed burnt-orange line, intervals as orange bands whose lightness falls with the level
(the 80 % band darker than the 95 % one), a dotted vertical rule where the history ends;
DejaVu Sans (shipped with matplotlib) at 10 pt; 900 x 450 pixels at 100 dpi unless asked.
An SVG carries a ``<title>`` and a ``<desc>`` as its alternative text.
"""

from __future__ import annotations

import io
import re
import textwrap
from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any
from xml.sax.saxutils import escape

import numpy as np

from service.core.applicability import NotApplicable
from service.core.data.filling import interpolate_gaps

HISTORY_COLOUR = "#2f3e46"
FORECAST_COLOUR = "#b5522b"
BAND_COLOURS = ("#f2c9a8", "#e59a6c", "#d0743f")  # widest level first: lightest
BAR_COLOUR = "#52796f"
BAND_RULE_COLOUR = "#8d99ae"
FONT = "DejaVu Sans"
FONT_SIZE = 10
DPI = 100
DEFAULT_WIDTH = 900
DEFAULT_HEIGHT = 450
MIN_PIXELS = 200
MAX_PIXELS = 3000


@dataclass(frozen=True)
class ForecastPicture:
    """What a forecast chart shows: recent history, the forecast and its intervals."""

    history_timestamps: list[str]
    history_values: list[float | None]
    timestamps: list[str]
    point: list[float]
    intervals: list[tuple[float, list[float], list[float]]]  # (coverage, lower, upper)
    title: str
    description: str


@dataclass(frozen=True)
class DiagnosticsPicture:
    """What a diagnostics chart shows: ACF and PACF with the band, and decompositions."""

    acf: list[float | None]
    pacf: list[float | None]
    band: tuple[float, float]
    values: list[float | None]
    periods: list[int] = field(default_factory=list)
    title: str = ""
    description: str = ""


def check_size(width: int, height: int) -> None:
    """Pixels within [MIN_PIXELS, MAX_PIXELS] on each side."""
    for name, value in (("width", width), ("height", height)):
        if not MIN_PIXELS <= value <= MAX_PIXELS:
            raise ValueError(f"{name} must be between {MIN_PIXELS} and {MAX_PIXELS} pixels")


def _canvas(width: int, height: int) -> Any:
    """A figure of ``width`` x ``height`` pixels on the Agg canvas (no display needed)."""
    from matplotlib.figure import Figure

    return Figure(figsize=(width / DPI, height / DPI), dpi=DPI)


def _style(axis: Any) -> None:
    axis.grid(True, color="#d9d9d9", linewidth=0.6)
    axis.set_axisbelow(True)
    for side in ("top", "right"):
        axis.spines[side].set_visible(False)
    axis.tick_params(labelsize=FONT_SIZE - 1)


def _numbers(values: Sequence[float | None]) -> np.ndarray:
    return np.array([np.nan if v is None else float(v) for v in values], dtype=float)


def _times(stamps: Sequence[str]) -> Any:
    import pandas as pd

    index = pd.DatetimeIndex(pd.to_datetime(list(stamps), utc=False, format="ISO8601"))
    return index.tz_localize(None) if index.tz is not None else index


def _save(figure: Any, fmt: str, title: str, description: str) -> bytes:
    import matplotlib

    matplotlib.rcParams["svg.hashsalt"] = "windvane"  # the same chart gives the same bytes
    buffer = io.BytesIO()
    metadata: dict[str, Any] = (
        {"Title": title, "Date": None, "Creator": None}
        if fmt == "svg"
        else {"Title": title, "Software": None}
    )
    figure.savefig(buffer, format=fmt, metadata=metadata)
    data = buffer.getvalue()
    return _with_alt_text(data, title, description) if fmt == "svg" else data


def _with_alt_text(svg: bytes, title: str, description: str) -> bytes:
    """The SVG with a ``<title>`` and ``<desc>`` right after its root element."""
    text = svg.decode("utf-8")
    text = re.sub(r"<metadata>.*?</metadata>\s*", "", text, count=1, flags=re.S)
    text = re.sub(r"\s*<title>.*?</title>", "", text, count=1, flags=re.S)
    alt = f"<title>{escape(title)}</title><desc>{escape(description)}</desc>"
    root = re.search(r"<svg[^>]*>", text)
    if root is None:
        return svg
    return (text[: root.end()] + alt + text[root.end() :]).encode("utf-8")


def forecast_chart(picture: ForecastPicture, fmt: str, width: int, height: int) -> bytes:
    """The recent history, the point forecast, one band per level and the end of history."""
    check_size(width, height)
    figure = _canvas(width, height)
    axis = figure.add_subplot()
    _style(axis)
    history_x = _times(picture.history_timestamps)
    future_x = _times(picture.timestamps)
    levels = sorted(picture.intervals, key=lambda item: -item[0])  # widest first
    for n, (coverage, lower, upper) in enumerate(levels):
        colour = BAND_COLOURS[min(n, len(BAND_COLOURS) - 1)]
        axis.fill_between(
            future_x,
            _numbers(lower),
            _numbers(upper),
            color=colour,
            linewidth=0,
            label=f"{coverage * 100:g} % interval",
        )
    axis.plot(
        history_x, _numbers(picture.history_values), color=HISTORY_COLOUR, lw=1.6, label="history"
    )
    axis.plot(
        future_x, _numbers(picture.point), color=FORECAST_COLOUR, lw=1.8, ls="--", label="forecast"
    )
    if len(history_x):
        axis.axvline(history_x[-1], color=HISTORY_COLOUR, lw=0.9, ls=":")
    axis.set_title(_wrapped(picture.title, width), fontsize=FONT_SIZE + 1, family=FONT, loc="left")
    axis.legend(fontsize=FONT_SIZE - 1, frameon=False, loc="upper left")
    figure.autofmt_xdate()
    figure.tight_layout()
    return _save(figure, fmt, picture.title.replace("\n", "; "), picture.description)


def _wrapped(title: str, width: int) -> str:
    """Each line of ``title`` wrapped to the chart's width (about 9 pixels a character)."""
    columns = max(20, width // 9)
    return "\n".join(textwrap.fill(line, columns) for line in title.splitlines())


def _correlogram(
    axis: Any, values: Sequence[float | None], band: tuple[float, float], name: str
) -> None:
    _style(axis)
    lags = np.arange(1, len(values) + 1)
    axis.bar(lags, np.nan_to_num(_numbers(values)), color=BAR_COLOUR, width=0.6)
    axis.axhspan(band[0], band[1], color=BAND_RULE_COLOUR, alpha=0.25, linewidth=0)
    axis.axhline(0.0, color=HISTORY_COLOUR, lw=0.8)
    axis.set_title(name, fontsize=FONT_SIZE, family=FONT, loc="left")
    axis.set_xlabel("lag", fontsize=FONT_SIZE - 1)


def _decomposition(values: np.ndarray, periods: list[int]) -> dict[str, np.ndarray]:
    """Trend, one seasonal component per period and the remainder: the diagnostics' own STL
    (one period) or MSTL (several), so the chart shows what the response reports."""
    # Imported here: statsmodels stays out of the server process, which only calls the pool.
    from service.core.diagnostics.cycles import mstl_parts
    from service.core.diagnostics.seasonality import decompose

    filled = interpolate_gaps(values)
    usable = sorted(p for p in periods if p > 1 and len(filled) >= 2 * p + 1)
    if not usable:
        return {}
    if len(usable) == 1:
        single = decompose(filled, usable[0])
        if isinstance(single, NotApplicable) or single.seasonal is None:
            return {}
        return {
            "trend": single.trend,
            f"season (period {usable[0]})": single.seasonal,
            "remainder": single.remainder,
        }
    several = mstl_parts(filled, usable)
    parts = {"trend": several.trend}
    for column, period in enumerate(usable):
        parts[f"season (period {period})"] = several.seasonal[:, column]
    parts["remainder"] = several.remainder
    return parts


def diagnostics_chart(picture: DiagnosticsPicture, fmt: str, width: int, height: int) -> bytes:
    """ACF and PACF with the white-noise band, then one panel per decomposition part."""
    check_size(width, height)
    parts = _decomposition(_numbers(picture.values), picture.periods)
    rows = 1 + len(parts)
    figure = _canvas(width, max(height, 150 * rows) if parts else height)
    grid = figure.add_gridspec(rows, 2)
    _correlogram(figure.add_subplot(grid[0, 0]), picture.acf, picture.band, "autocorrelation (ACF)")
    _correlogram(
        figure.add_subplot(grid[0, 1]), picture.pacf, picture.band, "partial autocorrelation (PACF)"
    )
    for row, (name, series) in enumerate(parts.items(), start=1):
        axis = figure.add_subplot(grid[row, :])
        _style(axis)
        axis.plot(np.arange(series.size), series, color=HISTORY_COLOUR, lw=1.0)
        axis.set_title(name, fontsize=FONT_SIZE, family=FONT, loc="left")
    figure.suptitle(
        _wrapped(picture.title, width), fontsize=FONT_SIZE + 1, family=FONT, x=0.01, ha="left"
    )
    figure.tight_layout()
    return _save(figure, fmt, picture.title.replace("\n", "; "), picture.description)
