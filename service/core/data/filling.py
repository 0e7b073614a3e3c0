"""The gap-free view of a series that tests which cannot take NaN are run on."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from service.core.errors import SeriesError

FILL_RULE = (
    "leading and trailing missing values dropped, interior ones interpolated linearly "
    "between their observed neighbours"
)


@dataclass(frozen=True)
class FilledSeries:
    """Finite values on a regular index, with a mask of the points that were observed."""

    index: pd.DatetimeIndex
    values: np.ndarray
    observed: np.ndarray
    dropped: int

    @property
    def interpolated(self) -> int:
        """How many interior missing values were filled in."""
        return int(self.values.size - np.count_nonzero(self.observed))

    def note(self) -> tuple[str, ...]:
        """A sentence for the response when anything was filled or dropped, else nothing."""
        if self.interpolated == 0 and self.dropped == 0:
            return ()
        return (
            f"run on the series with missing values handled ({self.interpolated} interpolated, "
            f"{self.dropped} dropped at the ends): {FILL_RULE}",
        )


def interpolate_gaps(values: np.ndarray) -> np.ndarray:
    """Missing values linearly interpolated by position; at the ends the nearest observed
    value is held (the one gap filling every fit and test shares). All missing: unchanged."""
    values = np.asarray(values, dtype=float)
    known = np.isfinite(values)
    if known.all() or not known.any():
        return values
    steps = np.arange(values.size)
    out = values.copy()
    out[~known] = np.interp(steps[~known], steps[known], values[known])
    return out


def fill_gaps(y: pd.Series) -> FilledSeries:
    """Trim missing values at the ends and interpolate the interior ones linearly by position."""
    values = y.to_numpy(dtype=float, na_value=np.nan)
    finite = np.isfinite(values)
    positions = np.flatnonzero(finite)
    index = pd.DatetimeIndex(y.index)
    if positions.size == 0:
        return FilledSeries(index[:0], values[:0], finite[:0], int(values.size))
    first, last = int(positions[0]), int(positions[-1])
    kept = values[first : last + 1]
    observed = finite[first : last + 1]
    filled = interpolate_gaps(kept)
    return FilledSeries(index[first : last + 1], filled, observed, values.size - kept.size)


def check_series(y: object, field: str = "series") -> pd.Series:
    """A pandas Series on a DatetimeIndex with a frequency (as core.series produces)."""
    if not isinstance(y, pd.Series):
        raise SeriesError(f"expected a pandas Series, got {type(y).__name__}", field=field)
    if not isinstance(y.index, pd.DatetimeIndex) or y.index.freq is None:
        raise SeriesError(
            "the series needs a regular DatetimeIndex with a frequency; parse it with core.series",
            field=field,
        )
    return y
