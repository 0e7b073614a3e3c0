"""Request schemas to core inputs: parse the series and specifications, prefixing fields."""

from __future__ import annotations

from service.api.schemas.common import SeriesIn
from service.config import Settings
from service.core.data.series import Aggregation, ParsedSeries, parse_series
from service.core.errors import WindvaneError
from service.core.models.base import Specification
from service.core.models.registry import specification_from_dict, with_series_periods


def parsed_series(
    series: SeriesIn, settings: Settings, min_points: int = 3, field: str = "series"
) -> ParsedSeries:
    """Parse the wire series; errors name fields under ``series``."""
    aggregate = (
        Aggregation(series.aggregate.frequency, series.aggregate.method)
        if series.aggregate
        else None
    )
    try:
        return parse_series(
            series.values,
            timestamps=series.timestamps,
            start=series.start,
            frequency=series.frequency,
            seasonal_period=series.seasonal_period,
            name=series.name,
            missing=series.missing,
            aggregate=aggregate,
            min_points=min_points,
            max_points=settings.max_points,
        )
    except WindvaneError as exc:
        raise exc.prefixed(field) from None


def specification(
    data: dict[str, object] | str, field: str, periods: tuple[float, ...] = ()
) -> Specification:
    """A specification from its JSON form (fields already under ``field``), or from a family
    name alone (its defaults), with the series' seasonal periods filled in where a family's
    ``periods`` is left null."""
    form = {"family": data} if isinstance(data, str) else data
    spec: Specification = with_series_periods(specification_from_dict(form, field), periods)
    return spec
