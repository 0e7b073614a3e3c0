"""Library warnings caught during a fit and turned into FitWarning data.

Fits must not print or raise on a library warning (pytest turns warnings into errors):
they are recorded and returned with the fitted model instead.
"""

from __future__ import annotations

import warnings
from collections.abc import Iterable, Iterator
from contextlib import contextmanager

import numpy as np

from service.core.models.base import FitWarning


@contextmanager
def captured(into: list[FitWarning], context: str = "") -> Iterator[None]:
    """Record every warning raised inside the block as a FitWarning appended to ``into``,
    once each, also when the block raises (the warnings may explain the failure)."""
    with warnings.catch_warnings(record=True) as caught, np.errstate(all="ignore"):
        warnings.simplefilter("always")
        try:
            yield
        finally:
            for item in unique_warnings(fit_warning(w, context) for w in caught):
                into.append(item)


def fit_warning(item: warnings.WarningMessage, context: str = "") -> FitWarning:
    """One library warning as data: a code from its category, its class name and first line."""
    text = f"{item.category.__name__}: {str(item.message).splitlines()[0]}"
    return FitWarning(warning_code(item.category), f"{context}: {text}" if context else text)


def warning_code(category: type[Warning]) -> str:
    """convergence, numerical (floating-point trouble) or library_warning."""
    if "Convergence" in category.__name__:
        return "convergence"
    if issubclass(category, RuntimeWarning):
        return "numerical"
    return "library_warning"


def unique_warnings(items: Iterable[FitWarning]) -> list[FitWarning]:
    """Each warning once, in the order first seen."""
    out: list[FitWarning] = []
    for item in items:
        if item not in out:
            out.append(item)
    return out
