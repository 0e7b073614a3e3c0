"""Candidate rules: the profile of a series and the families it leads to."""

from __future__ import annotations

import numpy as np
import pandas as pd

from service.core.models.base import as_dict, family_of
from service.core.models.registry import FAMILIES
from service.core.selection.candidates import (
    SeriesProfile,
    candidate_rules,
    candidates_for,
    profile_series,
    seasonality_test,
)


def monthly(values: np.ndarray) -> pd.Series:
    return pd.Series(values, index=pd.date_range("2010-01-01", periods=values.size, freq="MS"))


def profile(**changes: object) -> SeriesProfile:
    base = {
        "observations": 120,
        "seasonal_period": 12,
        "seasonal": True,
        "positive": True,
        "zero_share": 0.0,
        "random_walk": False,
    }
    base.update(changes)
    return SeriesProfile(**base)  # type: ignore[arg-type]


def families(p: SeriesProfile, thorough: bool = True) -> list[str]:
    return [data["family"] for data, _ in candidate_rules(p, thorough)]


def test_seasonality_test_sees_a_season_but_not_a_random_walk() -> None:
    rng = np.random.default_rng(2)
    t = np.arange(120)
    assert seasonality_test(10 + 3 * np.sin(2 * np.pi * t / 12) + rng.normal(size=120), 12)
    walks = [seasonality_test(rng.normal(size=120).cumsum(), 12) for _ in range(50)]
    # A 90 % test: about one walk in ten may be called seasonal, not most of them.
    assert sum(walks) <= 12


def test_intermittent_threshold_is_a_share_of_zeros_of_0_3() -> None:
    assert profile(zero_share=0.3).intermittent
    assert not profile(zero_share=0.29).intermittent
    assert families(profile(zero_share=0.5)) == [
        "naive",
        "seasonal_naive",
        "croston",
        "croston",
        "mean",
    ]


def test_long_season_goes_to_stl_and_short_series_skip_arima() -> None:
    long = families(profile(seasonal_period=52, observations=400), thorough=False)
    assert "stl" in long and profile(seasonal_period=52).model_period == 1
    # Hourly data with a daily season counts as long (m >= 24); raw ARIMA is left out there.
    hourly = families(profile(seasonal_period=24, observations=2000), thorough=False)
    assert "stl" in hourly and "arima" not in hourly and "arima" not in long
    assert profile(seasonal_period=23).model_period == 23
    short = families(profile(observations=30))
    assert "arima" not in short and "ets" in short
    assert "arima" in families(profile())
    assert "arima" not in families(profile(observations=30), thorough=False)


def test_default_candidates_search_arima_quickly_and_thorough_ones_fully() -> None:
    plain = profile(positive=False)
    default = [data for data, _ in candidate_rules(plain, thorough=False)]
    assert {"family": "arima", "search": "quick"} in default
    thorough = [data for data, _ in candidate_rules(plain, thorough=True)]
    assert {"family": "arima"} in thorough
    assert all(data.get("search") != "quick" for data in thorough)
    specs = candidates_for(plain, thorough=False).specifications
    assert [s.search for s in specs if s.family == "arima"] == ["quick"]


def test_positive_seasonal_series_get_arima_on_the_log_scale() -> None:
    specs = candidates_for(profile(), thorough=False).specifications
    logged = [s for s in specs if s.family == "transformed" and s.base.family == "arima"]
    assert len(logged) == 1 and not any(s.family == "arima" for s in specs)
    assert logged[0].transform.kind == "log"
    form = as_dict(logged[0])
    assert form["family"] == "arima" and form["transform"]["kind"] == "log"
    # Not positive: ARIMA on the original scale only.
    for other in (profile(positive=False), profile(positive=False, seasonal=False)):
        arimas = [s for s in candidates_for(other).specifications if family_of(s) == "arima"]
        assert [s.family for s in arimas] == ["arima"]


def test_positive_series_fitted_without_a_season_get_arima_on_both_scales() -> None:
    for p in (profile(seasonal=False), profile(seasonal_period=1, seasonal=False)):
        specs = candidates_for(p, thorough=False).specifications
        arimas = [s for s in specs if family_of(s) == "arima"]
        assert [s.family for s in arimas] == ["arima", "transformed"]
        assert arimas[1].transform.kind == "log" and arimas[1].base.search == "quick"
        reasons = [r for _, r in candidate_rules(p) if "ARIMA" in r]
        assert len(reasons) == 2 and "log scale" in reasons[1]
    # Short series get no ARIMA on either scale.
    short = candidates_for(profile(seasonal=False, observations=20)).specifications
    assert not any(family_of(s) == "arima" for s in short)


def test_positive_series_also_get_ets_with_additive_errors_on_the_log_scale() -> None:
    for p in (profile(), profile(seasonal=False), profile(seasonal_period=52)):
        specs = candidates_for(p).specifications
        logged = [s for s in specs if s.family == "transformed" and s.base.family == "ets"]
        assert len(logged) == 1 and logged[0].base.error == "add"
        assert any(s.family == "ets" for s in specs)  # beside the search on the raw scale
    plain = candidates_for(profile(positive=False)).specifications
    assert not any(s.family == "transformed" for s in plain)


def test_profile_reads_zeros_negatives_and_diagnostics() -> None:
    y = monthly(np.array([0.0, 0.0, 3.0, 0.0, 5.0] * 8))
    p = profile_series(y, 12)
    assert p.zero_share == 0.6 and p.intermittent and not p.positive
    negative = monthly(np.array([0.0, -1.0, 2.0, 0.0] * 10))
    assert profile_series(negative, 1).zero_share == 0.0
    given = {"random_walk": {"is_random_walk": True, "reason": "said so"}}
    walked = profile_series(monthly(np.arange(1.0, 41.0)), 1, diagnostics=given)
    assert walked.random_walk and walked.random_walk_reason == "said so"


def test_profile_reads_the_verdict_of_core_diagnostics() -> None:
    from service.core.diagnostics.report import diagnose

    rng = np.random.default_rng(21)
    y = monthly(100 + rng.normal(size=120).cumsum())
    report = diagnose(y, 12)
    p = profile_series(y, 12, diagnostics=report)
    assert p.random_walk == report.random_walk.is_random_walk
    assert p.random_walk_reason == report.random_walk.reason


def test_rules_become_registered_specifications_or_are_listed_as_skipped() -> None:
    p = profile()
    chosen = candidates_for(p)
    # A transformed candidate wraps a registered family.
    assert all(getattr(s, "base", s).family in FAMILIES for s in chosen.specifications)
    assert len(chosen.specifications) + len(chosen.skipped) == len(candidate_rules(p))
    assert len(chosen.reasons) == len(chosen.specifications)


def test_theta_joins_seasonal_fits_and_the_trend_combination_non_seasonal_ones() -> None:
    seasonal = families(profile(), thorough=False)
    assert "theta" in seasonal and "combination" not in seasonal
    flat = families(profile(seasonal=False), thorough=False)
    assert "theta" not in flat and "combination" in flat and "ets" in flat
    # A long season is fitted with m = 1 beside STL: no theta there either.
    assert "theta" not in families(profile(seasonal_period=52), thorough=False)
    # Its drift share is fitted with α on running slopes, not fixed at half.
    theta = [s for s in candidates_for(profile()).specifications if family_of(s) == "theta"]
    assert [s.slope_share for s in theta] == ["fitted_running"]
