"""The guards between the choice and the delivered forecast: never worse than the benchmark
without saying so.

- Random-walk guard (skill.py): a random walk (a seasonal random walk) whose chosen forecast
  is not ``SKILL_MARGIN`` (5 %) better than the naive (seasonal naive) forecast gets that
  forecast; the drift forecast stands in for naive when the average step is expected to pay
  (``skill.drift_pays``), and faces the benchmark guard like any other forecast.
- Benchmark guard, for every series: when the chosen forecast's skill over the benchmark
  (seasonal naive for a seasonal series, naive otherwise) is below ``GUARD_MARGIN``, the
  benchmark joins the forecast in a combination, weighted like the members among themselves
  by the inverse square of the backtest scores (the chosen forecast's and the benchmark's):
  the worse the chosen forecast did, the more of the benchmark is delivered.
- Whenever the delivered forecast's skill is <= 0 the response carries
  ``no_skill_over_naive`` with a plain sentence.

Rule and margin chosen on the development data (tests/benchmarks/RESULTS.md): delivering the
benchmark alone lost more on the series where the models recovered out of sample than it
saved on the others.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

from service.core.selection.choice import score_weights
from service.core.selection.skill import SKILL_MARGIN, skill

GUARD_MARGIN = 0.0
RANDOM_WALK_GUARD = "naive_guard"
BENCHMARK_GUARD = "benchmark_guard"


@dataclass(frozen=True)
class Guarded:
    """The delivered members (candidate indices) and weights, and the rule that chose them."""

    rule: str
    members: tuple[int, ...]
    weights: tuple[float, ...] = ()


def guard(
    chosen: Guarded,
    chosen_score: float,
    walk: tuple[int, float] | None,
    benchmark: tuple[int, float],
) -> Guarded:
    """The random-walk guard, then the benchmark guard, applied to the chosen members;
    ``walk`` is the random-walk guard's forecast (candidate index, backtest score) when the
    series is judged a random walk, ``benchmark`` the benchmark's."""
    rule = BENCHMARK_GUARD
    if walk is not None:
        over = skill(chosen_score, walk[1])
        if over is None or over < SKILL_MARGIN:
            # The walk's forecast still faces the benchmark guard: a drift forecast that lost
            # to naive in the backtest (naive that lost to seasonal naive on a seasonal
            # series) gets the benchmark mixed in, as every other forecast would.
            chosen, chosen_score, rule = (
                Guarded(RANDOM_WALK_GUARD, (walk[0],)),
                walk[1],
                RANDOM_WALK_GUARD,
            )
    bench_index, bench_score = benchmark
    if chosen.members == (bench_index,):
        return chosen
    over_bench = skill(chosen_score, bench_score)
    if over_bench is None:
        return Guarded(rule, (bench_index,))
    if over_bench >= GUARD_MARGIN:
        return chosen
    own, bench_share = score_weights([chosen_score, bench_score])
    within = shares(len(chosen.members), chosen.weights)
    weights = (*(w * own for w in within), bench_share)
    return Guarded(rule, (*chosen.members, bench_index), weights)


def shares(count: int, weights: Sequence[float]) -> tuple[float, ...]:
    """``weights`` scaled to sum to one; equal shares when none are given."""
    if not weights:
        return tuple(1.0 / count for _ in range(count))
    total = float(sum(weights))
    return tuple(float(w) / total for w in weights)


def benchmark_name(label: str) -> str:
    """'seasonal naive' or 'naive', for sentences."""
    return "seasonal naive" if label.startswith("seasonal naive") else "naive"


def no_skill_message(rule: str, benchmark: str, skill_value: float, walk_message: str) -> str:
    """The plain sentence of the ``no_skill_over_naive`` warning."""
    if rule == RANDOM_WALK_GUARD:
        if skill_value < 0:
            # The guard's forecast (drift, or naive on a seasonal series) lost to the benchmark
            # in the backtest: the benchmark was mixed in.
            return (
                f"{walk_message} In the backtest that forecast did worse than the "
                f"{benchmark} forecast, so the {benchmark} forecast is mixed in; the mixture "
                f"still did {-100 * skill_value:.0f} % worse than the {benchmark} forecast "
                "alone: trust it no more than that simple rule."
            )
        return walk_message
    if skill_value == 0:
        return (
            f"No model beat the {benchmark} forecast in the backtest, so the {benchmark} "
            "forecast is returned: the series shows no pattern the models could use."
        )
    worse = f"{-100 * skill_value:.0f} %"
    mixed = f", even with the {benchmark} forecast mixed in" if rule == BENCHMARK_GUARD else ""
    return (
        f"The forecast did not beat the {benchmark} forecast in the backtest (it was {worse} "
        f"worse{mixed}): trust it no more than that simple rule."
    )
