"""The selection's decision: a weighted combination by default, one model only on evidence.

Forecast combination is the most robust finding of the forecasting competitions (Makridakis,
Spiliotis & Assimakopoulos 2020 on M4; Petropoulos & Svetunkov 2020): picking the single best
of a few backtest origins chases noise, averaging does not. So:

- Members of the combination: every working candidate except the benchmarks (naive, seasonal
  naive, drift, mean), e.g. ETS, Theta, ARIMA and the SES/Holt/damped average.
- Weights: a blend of two. The larger part, 1 - ``STACKING_SHARE``, is inversely
  proportional to the square of each member's pooled backtest score (``WEIGHT_POWER``), the
  inverse-error weighting of Bates & Granger (1969): a member that failed badly in the
  backtest keeps a small say instead of an equal one, and no threshold decides who is in.
  The rest are the stacked weights (stacking.py), fitted so the combination itself scores
  best in the backtest; fitted weights are noisy, hence only a share of them: estimated
  weights shrunk toward simple ones, as Diebold & Pauly (1990) propose (the weightings
  compared are in tests/benchmarks/RESULTS.md).
- A single model replaces the combination only when its pooled backtest score is at least
  ``SINGLE_MARGIN`` (10 %) lower AND it is better at a majority of the origins: a clear margin
  over several origins, not one lucky window.
- Drift is a benchmark only in the default candidate set: it is never combined nor chosen
  (it won short backtests on series with chance trends and then lost out of sample).
- Ties (scores within ``TIE`` of each other) go to the simpler model (fewer parameters).
- With several seasonal periods the combination is trimmed: members scoring more than
  ``SEVERAL_PERIODS_TRIM`` times the best member leave it (a trimmed combination).

With the default 3 selection origins the single-model path needs longer plans than the
default gives, so in practice the combination is returned; the rules tried before this one
are in tests/benchmarks/RESULTS.md. The majority test compares mean scaled errors per origin
whatever the ranking metric.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from service.core.evaluation.records import ModelBacktest, RankEntry
from service.core.models.base import Specification, family_of
from service.core.selection.averaging import combine
from service.core.selection.stacking import stacked_weights

WEIGHT_POWER = 2.0
STACKING_SHARE = 0.3
"""The stacked weights' share of each member's weight; the inverse-square weights have the
rest (blended_weights)."""
SINGLE_MARGIN = 0.10
TIE = 0.01
MIN_WINDOWS = 5
"""Disjoint backtest windows needed before a single model may replace the combination."""
SEVERAL_PERIODS_TRIM = 1.2
"""With several seasonal periods only members scoring within 20 % of the best member combine:
there theta, ARIMA and the single-period models scored 1.3-2.7 times the best several-period
member in the backtest yet kept 25-35 % of the weight (tests/benchmarks/RESULTS.md)."""
BENCHMARK_FAMILIES = frozenset({"naive", "seasonal_naive", "drift", "mean"})
NEVER_CHOSEN = frozenset({"drift"})
"""Families left out of the choice in the default candidate set (always in the ranking)."""
SIMPLICITY = ("naive", "seasonal_naive", "mean", "drift", "croston", "theta", "ets", "arima")
"""Simpler first: the order ties are broken in."""


@dataclass(frozen=True)
class Choice:
    """Which candidates (indices) make the forecast, with what weights, by which rule, and the
    final ranking."""

    rule: str
    members: tuple[int, ...]
    ranking: tuple[RankEntry, ...]
    weights: tuple[float, ...] = ()
    """One weight per member, summing to one (empty for a single model)."""


def _simplicity(spec: Specification) -> int:
    family = family_of(spec)
    return SIMPLICITY.index(family) if family in SIMPLICITY else len(SIMPLICITY)


def origin_scores(backtest: ModelBacktest) -> np.ndarray:
    """Mean scaled absolute error per origin (NaN actuals left out)."""
    scaled = backtest.scaled_abs_errors()
    out = np.full(scaled.shape[0], np.nan)
    for k, row in enumerate(scaled):
        finite = row[np.isfinite(row)]
        if finite.size:
            out[k] = float(finite.mean())
    return out


def wins_majority(single: ModelBacktest, other: ModelBacktest) -> bool:
    """True when ``single`` has the lower error at more than half of the shared origins."""
    a, b = origin_scores(single), origin_scores(other)
    keep = np.isfinite(a) & np.isfinite(b)
    return bool(keep.any() and np.sum(a[keep] < b[keep]) * 2 > keep.sum())


def score_weights(scores: Sequence[float], windows: int = MIN_WINDOWS) -> tuple[float, ...]:
    """Weights ∝ score^-power, normalised; a zero score (a perfect backtest) takes all.

    The power is WEIGHT_POWER with at least MIN_WINDOWS disjoint backtest windows and shrinks
    in proportion below that: scores from one or two windows of a short series are too noisy
    to hand one member nearly all the weight."""
    values = np.asarray(scores, dtype=float)
    if np.any(values <= 0):
        perfect = (values <= 0).astype(float)
        return tuple(float(x) for x in perfect / perfect.sum())
    power = WEIGHT_POWER * min(1.0, max(windows, 1) / MIN_WINDOWS)
    raw = values**-power
    return tuple(float(x) for x in raw / raw.sum())


def blended_weights(
    members: Sequence[ModelBacktest], metric: str, windows: int = MIN_WINDOWS
) -> tuple[float, ...]:
    """(1 - STACKING_SHARE) x the inverse-square weights + STACKING_SHARE x the stacked ones
    (the inverse-square weights alone when stacking finds none)."""
    scored = score_weights([m.score(metric) for m in members], windows)
    stacked = stacked_weights(members)
    if stacked is None:
        return scored
    return tuple(
        (1.0 - STACKING_SHARE) * a + STACKING_SHARE * b
        for a, b in zip(scored, stacked, strict=True)
    )


def disjoint_windows(origins: Sequence[int], horizon: int) -> int:
    """How many of the origins' forecast windows do not overlap: the independent evidence."""
    count, end = 0, -1
    for origin in origins:
        if origin >= end:
            count, end = count + 1, origin + horizon
    return count


def best_single(
    results: Sequence[ModelBacktest],
    specs: Sequence[Specification],
    eligible: Sequence[int],
    metric: str,
) -> int:
    """The lowest score among ``eligible``; within ``TIE`` of it the simplest model wins."""
    best = min(results[i].score(metric) for i in eligible)
    close = [i for i in eligible if results[i].score(metric) <= best * (1.0 + TIE)]
    return min(close, key=lambda i: (_simplicity(specs[i]), results[i].score(metric), i))


def choose(
    results: Sequence[ModelBacktest],
    specs: Sequence[Specification],
    order: Sequence[int],
    metric: str,
    ranking: tuple[RankEntry, ...],
    default_set: bool,
    windows: int,
    trim: float | None = None,
) -> Choice:
    """The weighted combination of the non-benchmark candidates unless one model clearly beats
    it; with ``trim`` only those scoring within that factor of the best of them combine
    (``SEVERAL_PERIODS_TRIM``)."""
    never = NEVER_CHOSEN if default_set else frozenset()
    eligible = [i for i in order if family_of(specs[i]) not in never] or list(order)
    single = best_single(results, specs, eligible, metric)
    pool = [i for i in order if family_of(specs[i]) not in BENCHMARK_FAMILIES]
    if trim is not None and pool:
        best = min(results[i].score(metric) for i in pool)
        pool = [i for i in pool if results[i].score(metric) <= trim * best]
        if len(pool) == 1:
            return Choice("winner", (pool[0],), ranking)
    if len(pool) < 2:
        return Choice("winner", (single,), ranking)
    weights = blended_weights([results[i] for i in pool], metric, windows)
    mixed = combine([results[i] for i in pool], weights=weights)
    mixed_score = mixed.score(metric)
    ranking = tuple(
        sorted(
            (*ranking, RankEntry(mixed.label, mixed.specification, mixed_score)),
            key=lambda r: r.score,
        )
    )
    clear = results[single].score(metric) <= (1.0 - SINGLE_MARGIN) * mixed_score
    if clear and windows >= MIN_WINDOWS and wins_majority(results[single], mixed):
        return Choice("winner", (single,), ranking)
    return Choice("combination", tuple(pool), ranking, weights)
