"""Do the sections of one diagnostics response tell one story? The contradictions, if any.

The stationarity verdict, the differencing orders, the random-walk verdict and the findings are
built from one unit-root decision, so this should always return nothing; the tests assert it
over seeded simulations of every process in the random-walk benchmark, and ``diagnose`` adds
anything it finds to the notes instead of hiding it.
"""

from __future__ import annotations

from service.core.diagnostics.differencing import DifferencingOrders
from service.core.diagnostics.random_walk import RandomWalkVerdict
from service.core.diagnostics.sections import Diagnostics
from service.core.diagnostics.stationarity import Stationarity

_STATIONARY = ("stationary", "trend_stationary")


def contradictions(d: Diagnostics) -> tuple[str, ...]:
    """Plain sentences naming each pair of sections that disagree without saying why."""
    s, o, w = d.stationarity, d.differencing, d.random_walk
    if not isinstance(s, Stationarity) or not isinstance(o, DifferencingOrders):
        return ()
    out: list[str] = []
    if isinstance(w, RandomWalkVerdict):
        out += _walk_against(w, s.verdict, o)
        out += _findings_against(w, d.findings)
    if s.verdict in _STATIONARY and o.regular != 0:
        out.append(f"stationarity says {s.verdict} but the differencing asks for d = {o.regular}")
    if s.verdict == "difference_stationary" and o.regular + o.seasonal == 0:
        out.append("stationarity says difference_stationary but the differencing asks for none")
    return tuple(out)


def _walk_against(w: RandomWalkVerdict, verdict: str, o: DifferencingOrders) -> list[str]:
    out: list[str] = []
    if w.is_seasonal_random_walk:
        if verdict != "seasonal_difference_stationary":
            out.append(f"a seasonal random walk, but stationarity says {verdict}")
        if (o.seasonal, o.regular) != (1, 0):
            orders = f"D = {o.seasonal}, d = {o.regular}"
            out.append(f"a seasonal random walk, but the orders are {orders}")
    elif w.is_random_walk and w.differences == 1:
        if verdict != "difference_stationary":
            out.append(f"a random walk with a unit root, but stationarity says {verdict}")
        if (o.regular, o.seasonal) != (1, 0):
            out.append(f"a random walk, but the orders are d = {o.regular}, D = {o.seasonal}")
    elif w.is_random_walk:
        if verdict not in _STATIONARY:
            out.append(f"a slowly mean-reverting series, but stationarity says {verdict}")
        if o.regular != 0:
            out.append(f"a slowly mean-reverting series, but the orders ask for d = {o.regular}")
    elif verdict == "seasonal_difference_stationary":
        out.append("stationarity finds a seasonal random walk that the verdict does not")
    if w.differences is not None and o.seasonal == 0 and w.differences != o.regular:
        out.append(f"the verdict counts {w.differences} difference(s), the orders d = {o.regular}")
    return out


def _findings_against(w: RandomWalkVerdict, findings: tuple[str, ...]) -> list[str]:
    said = [f for f in findings if "random walk" in f]
    if (w.is_random_walk or w.is_seasonal_random_walk) and not said:
        return ["the verdict finds a random walk that the findings do not mention"]
    if not (w.is_random_walk or w.is_seasonal_random_walk) and any(
        "not a random walk" not in f for f in said
    ):
        return ["the findings call the series a random walk against the verdict"]
    return []
