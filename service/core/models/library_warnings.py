"""Library warnings caught during a fit and turned into FitWarning data.

Fits must not print or raise on a library warning (pytest turns warnings into errors):
they are recorded and returned with the fitted model instead.
"""

from __future__ import annotations

import warnings
from collections.abc import Iterator
from contextlib import contextmanager

import numpy as np

from service.core.models.base import FitWarning


@contextmanager
def captured(into: list[FitWarning], context: str) -> Iterator[None]:
    """Record every warning raised inside the block as a FitWarning appended to ``into``."""
    with warnings.catch_warnings(record=True) as caught, np.errstate(all="ignore"):
        warnings.simplefilter("always")
        yield
    seen: set[str] = set()
    for item in caught:
        text = f"{context}: {item.category.__name__}: {item.message}"
        if text not in seen:
            seen.add(text)
            into.append(FitWarning(_code(item.category), text))


def _code(category: type[Warning]) -> str:
    name = category.__name__
    if "Convergence" in name:
        return "convergence"
    if issubclass(category, RuntimeWarning):
        return "numerical"
    return "library_warning"
