"""Exponential smoothing in the ETS taxonomy (Hyndman et al. 2008) on statsmodels' ETSModel.

Fields left out are chosen by AICc. The search is cheap first (heuristic initial states,
a handful of smoothing parameters per candidate), then the winner is fitted exactly with
estimated initial states started from the search solution: the same idea as DESIGN's
"search cheaply, then fit exactly", and it also avoids the poor local optima the default
starting values of ETSModel sometimes reach on seasonal data.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING, Any, ClassVar

import numpy as np
import pandas as pd

from service.core.errors import FitError, SpecificationError
from service.core.models.base import as_dict, parameter

# The implementation (statsmodels) loads in fit: the HTTP server imports this module for the
# catalogue and the specifications only (DEVELOPERS.md, after the layout).
if TYPE_CHECKING:
    from service.core.models.ets.fitted import EtsFitted

MAX_SEASONAL_PERIOD = 24
"""The longest season the ETS family takes (statsmodels' ETS estimates one state per season)."""


@dataclass(frozen=True)
class EtsSpec:
    """An ETS model; any component left null is chosen by AICc over the admissible models."""

    family: ClassVar[str] = "ets"
    summary: ClassVar[str] = (
        "Exponential smoothing state space model (error, trend, season), chosen by AICc "
        "when components are left out."
    )
    constraints: ClassVar[tuple[str, ...]] = (
        "Multiplicative error, trend or season need strictly positive data.",
        "A seasonal component needs a seasonal period between 2 and 24 and two full seasons.",
        "damped needs a trend; it is ignored when trend is none.",
        "The automatic search leaves out multiplicative trend and additive error with "
        "multiplicative season (numerically unstable); ask for them explicitly.",
        "Intervals are analytic for additive-error models without multiplicative components, "
        "simulated (seeded, 5000 paths) otherwise.",
    )

    error: str | None = parameter(
        None, "Error type; null to choose by AICc.", kind="choice", allowed=("add", "mul")
    )
    trend: str | None = parameter(
        None,
        "Trend type; null to choose by AICc.",
        kind="choice",
        allowed=("none", "add", "mul"),
    )
    damped: bool | None = parameter(None, "Damp the trend; null to choose by AICc.", kind="boolean")
    season: str | None = parameter(
        None,
        "Season type; null to choose by AICc.",
        kind="choice",
        allowed=("none", "add", "mul"),
    )

    def __post_init__(self) -> None:
        for name, allowed in (
            ("error", ("add", "mul")),
            ("trend", ("none", "add", "mul")),
            ("season", ("none", "add", "mul")),
        ):
            value = getattr(self, name)
            if value is not None and value not in allowed:
                raise SpecificationError(
                    f"{name} must be one of {', '.join(allowed)}; got {value!r}",
                    field=f"model.{name}",
                )

    def fit(self, y: pd.Series, seasonal_period: int = 1) -> EtsFitted:
        """Fit this model (searching the components left out) and return the fitted winner."""
        from service.core.models.ets.search import search_ets

        return search_ets(y, seasonal_period, self).best

    def candidates(self, y: np.ndarray, seasonal_period: int) -> list[EtsSpec]:
        """The complete specifications the search tries on this data."""
        return candidates_for(self, y, seasonal_period)

    def settled_from(self, chosen: EtsSpec, estimates: tuple[float, ...]) -> EtsSettledSpec | None:
        """``chosen`` to be fitted on another history from ``estimates`` (None without them)."""
        return EtsSettledSpec(chosen, estimates) if estimates else None

    def is_complete(self) -> bool:
        """True when every component is given, so no search is needed."""
        return None not in (self.error, self.trend, self.season) and (
            self.trend == "none" or self.damped is not None
        )


def candidates_for(spec: EtsSpec, y: np.ndarray, seasonal_period: int) -> list[EtsSpec]:
    """The complete specifications the search tries for ``spec`` on this data."""
    positive = bool(np.all(y > 0))
    seasonal_ok = 2 <= seasonal_period <= MAX_SEASONAL_PERIOD and y.size >= 2 * seasonal_period
    _check_explicit(spec, positive, seasonal_ok, seasonal_period)
    errors = [spec.error] if spec.error else (["add", "mul"] if positive else ["add"])
    if spec.season:
        seasons = [spec.season]
    elif seasonal_ok:
        seasons = ["none", "add", "mul"] if positive else ["none", "add"]
    else:
        seasons = ["none"]
    trends = [spec.trend] if spec.trend else (["add"] if spec.damped else ["none", "add"])
    out: list[EtsSpec] = []
    for error in errors:
        for season in seasons:
            unstable = error == "add" and season == "mul"
            if unstable and not (spec.error and spec.season):
                continue
            for trend in trends:
                for damped in [False] if trend == "none" else _dampings(spec.damped):
                    out.append(EtsSpec(error, trend, damped, season))
    return out


def _dampings(damped: bool | None) -> list[bool]:
    return [damped] if damped is not None else [False, True]


def _check_explicit(spec: EtsSpec, positive: bool, seasonal_ok: bool, period: int) -> None:
    for name in ("error", "trend", "season"):
        if getattr(spec, name) == "mul" and not positive:
            raise FitError(
                f"a multiplicative {name} needs strictly positive data", field=f"model.{name}"
            )
    if spec.season in ("add", "mul") and not seasonal_ok:
        raise FitError(
            f"a seasonal ETS needs a seasonal period between 2 and {MAX_SEASONAL_PERIOD} and "
            f"two full seasons of data (period {period})",
            field="model.season",
        )


@dataclass(frozen=True)
class EtsSettledSpec:
    """A complete ETS model to be fitted on another history, its exact fit started from earlier
    estimates of the same model.

    Not a family of its own: auto settles each ETS candidate's model on the whole series and
    scores it re-estimated on the data before the first backtest origin with this. The exact
    fit (initial states estimated) is most of an ETS fit's cost, and from a nearby start it
    converges in a few iterations."""

    family: ClassVar[str] = "ets"

    model: EtsSpec
    start: tuple[float, ...]
    """The earlier exact estimates of ``model``, in statsmodels' parameter order."""

    def fit(self, y: pd.Series, seasonal_period: int = 1) -> EtsFitted:
        """One exact fit of ``model`` started at ``start``."""
        from service.core.models.ets.search import search_ets

        return search_ets(y, seasonal_period, self.model, warm=(self.model, self.start)).best

    def json_form(self) -> dict[str, Any]:
        """The model, as a request would write it."""
        return as_dict(self.model)
