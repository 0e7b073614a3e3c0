"""POST /v1/diagnostics: request (the response is documented by example)."""

from __future__ import annotations

from typing import Literal

from pydantic import Field

from service.api.schemas.common import Lag, SeriesIn, Strict


class DiagnosticsRequest(Strict):
    """A series and how deep to look."""

    series: SeriesIn
    max_lag: Lag | None = Field(
        None, description="Last lag of the ACF/PACF; default min(max(10, 2m), n/4)."
    )
    include: list[Literal["components"]] = Field(
        default_factory=list,
        description="`components` adds the STL trend, seasonal and remainder series.",
    )
