"""Every model label, built in one place.

The trade's notations stay as the textbooks write them: the ETS taxonomy letters of Hyndman,
Koehler, Ord & Snyder (2008), e.g. ``ETS(A,Ad,N)``, and Box and Jenkins' orders, e.g.
``ARIMA(0,1,1)x(0,1,1)12``. Everything else is said in plain lower-case words, with details
after a comma: ``ARIMA(2,1,1), constant: drift``, ``seasonal naive, period 12``,
``STL (period 24) then ETS(A,N,N)``, ``combination of 4 models``.
"""

from __future__ import annotations

from collections.abc import Sequence

from service.core.data.periods import period_text

_ETS_LETTERS = {"none": "N", "add": "A", "mul": "M"}
_THETA_SHARES = {
    "half": "",
    "fitted": ", slope share fitted",
    "fitted_running": ", slope share fitted on running slopes",
}


def model_label(
    family: str,
    *,
    period: float | Sequence[float] = 1,
    components: tuple[str, str, bool, str] = ("add", "none", False, "none"),
    orders: tuple[int, int, int] = (0, 0, 0),
    seasonal_orders: tuple[int, int, int] = (0, 0, 0),
    constant: str = "none",
    variant: str = "classic",
    base: str = "",
    members: int = 0,
    harmonics: Sequence[int] = (),
    weighted: bool = False,
    power: float = 0.0,
    slope_share: str = "half",
) -> str:
    """The label of one fitted model (or of one candidate in a search).

    ``period``: the seasonal period(s) of seasonal naive, Theta's adjustment, STL, MSTL and
    harmonic regression (``harmonics``: the Fourier pairs per period);
    ``components``: ETS error, trend, damped, season; ``orders``, ``seasonal_orders`` and
    ``constant`` ("none", "mean" or "drift"): ARIMA; ``variant``: Croston's, or Theta's
    adjustment ("additive" when not by ratios); ``base``: the
    label of the model inside STL, MSTL or a transform (the errors' label for harmonic
    regression); ``members``, ``weighted``: a combination's
    size and whether it was given weights; ``power``: the Box-Cox exponent of the
    "transformed" family (0 is the log); ``slope_share``: how Theta's drift share was set
    ("half", "fitted" or "fitted_running").
    """
    periods = [period] if isinstance(period, (int, float)) else list(period)
    seasonal = [m for m in periods if m > 1]
    match family:
        case "mean" | "naive" | "drift":
            return family
        case "seasonal_naive":
            return f"seasonal naive, {_periods(seasonal or periods)}"
        case "ets":
            error, trend, damped, season = components
            letters = _ETS_LETTERS[trend] + ("d" if damped and trend != "none" else "")
            return f"ETS({_ETS_LETTERS[error]},{letters},{_ETS_LETTERS[season]})"
        case "arima":
            text = "ARIMA({},{},{})".format(*orders)
            if seasonal and any(seasonal_orders):
                text += "x({},{},{}){}".format(*seasonal_orders, period_text(seasonal[0]))
            return text if constant == "none" else f"{text}, constant: {constant}"
        case "theta":
            share = _THETA_SHARES[slope_share]
            if not seasonal:
                return f"theta{share}"
            how = ", additive" if variant == "additive" else ""
            return f"theta, seasonally adjusted ({_periods(seasonal)}{how}){share}"
        case "stl":
            return f"STL ({_periods(seasonal or periods)}) then {base}"
        case "mstl":
            return f"MSTL ({_periods(seasonal or periods)}) then {base}"
        case "harmonic_regression":
            counts = ", ".join(str(k) for k in harmonics)
            return (
                f"harmonic regression ({_periods(periods)}; harmonics {counts}) with {base} errors"
            )
        case "croston":
            if variant == "sba":
                return "Croston's method, Syntetos-Boylan correction"
            return "Croston's method"
        case "combination":
            text = f"combination of {members} models"
            return f"weighted {text}" if weighted else text
        case "transformed":
            if power == 0.0:
                return f"{base}, on the log scale"
            return f"{base}, on the Box-Cox scale (power {power:.4g})"
    raise ValueError(f"no label for family {family!r}")


def _periods(periods: Sequence[float]) -> str:
    if len(periods) == 1:
        return f"period {period_text(periods[0])}"
    return "periods " + ", ".join(period_text(m) for m in periods)
