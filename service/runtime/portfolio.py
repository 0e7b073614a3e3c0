"""What a planner reads before trusting a batch: one row per series and a portfolio summary.

Both are computed from the batch's outcomes (plain dicts, as answered over HTTP), so the
HTTP batch and `windvane batch` report the same things the same way.
"""

from __future__ import annotations

import statistics
from collections.abc import Iterable, Mapping
from typing import Any

FORECASTABLE = "forecastable"
RANDOM_WALK = "random_walk"
NO_SKILL = "no_skill_over_naive"
NOT_ASSESSED = "not_assessed"
WORST_LISTED = 5


def verdict(forecast: Mapping[str, Any]) -> str:
    """Forecastability of one answered series, from its automatic selection.

    A random walk (the diagnostics' verdict) comes first; otherwise a skill over the naive
    benchmark <= 0 means no skill. An explicit model has no backtest: not assessed."""
    selection = forecast.get("selection") or {}
    if not selection:
        return NOT_ASSESSED
    if (selection.get("profile") or {}).get("random_walk"):
        return RANDOM_WALK
    skill = selection.get("skill_over_naive")
    if skill is None:
        return NOT_ASSESSED
    return FORECASTABLE if skill > 0 else NO_SKILL


def summary_row(result: Mapping[str, Any]) -> dict[str, Any]:
    """One series' line of the summary table: model, skill, verdict, warnings, problem."""
    row: dict[str, Any] = {
        "series_id": result.get("id") if result.get("id") is not None else str(result["index"]),
        "status": result["status"],
        "model": None,
        "skill_over_naive": None,
        "verdict": None,
        "warnings": "",
        "problem": "",
    }
    forecast = result.get("forecast")
    if forecast:
        selection = forecast.get("selection") or {}
        row["model"] = (forecast.get("model") or {}).get("label")
        row["skill_over_naive"] = selection.get("skill_over_naive")
        row["verdict"] = verdict(forecast)
        row["warnings"] = " ".join(sorted({w["code"] for w in forecast.get("warnings", [])}))
    problem = result.get("problem")
    if problem:
        fields = ", ".join(e["field"] for e in problem.get("errors", []) if e.get("field"))
        row["problem"] = f"{problem.get('code')}: {problem.get('detail')}" + (
            f" ({fields})" if fields else ""
        )
    return row


def portfolio(rows: Iterable[Mapping[str, Any]]) -> dict[str, Any]:
    """Counts by verdict, failures, the median skill and the least skilful series."""
    rows = list(rows)
    answered = [r for r in rows if r["status"] == 200]
    counts = {v: 0 for v in (FORECASTABLE, RANDOM_WALK, NO_SKILL, NOT_ASSESSED)}
    for r in answered:
        counts[str(r["verdict"])] += 1
    skills = [
        (float(r["skill_over_naive"]), str(r["series_id"]))
        for r in answered
        if r.get("skill_over_naive") is not None
    ]
    skills.sort()
    return {
        "series": len(rows),
        "answered": len(answered),
        "failed": sum(1 for r in rows if r["status"] != 200 and not _not_run(r)),
        "not_run": sum(1 for r in rows if _not_run(r)),
        "verdicts": counts,
        "median_skill_over_naive": statistics.median(s for s, _ in skills) if skills else None,
        "least_skill": [{"series_id": i, "skill_over_naive": s} for s, i in skills[:WORST_LISTED]],
    }


def _not_run(row: Mapping[str, Any]) -> bool:
    return str(row.get("problem", "")).startswith("not_run")


def portfolio_lines(summary: Mapping[str, Any]) -> list[str]:
    """The portfolio summary as a few plain sentences for a terminal."""
    v = summary["verdicts"]
    lines = [
        f"{summary['series']} series: {summary['answered']} answered, {summary['failed']} "
        f"failed, {summary['not_run']} not run",
        f"forecastable {v[FORECASTABLE]}, random walk {v[RANDOM_WALK]}, no skill over naive "
        f"{v[NO_SKILL]}, not assessed (explicit model) {v[NOT_ASSESSED]}",
    ]
    median = summary["median_skill_over_naive"]
    if median is not None:
        lines.append(f"median skill over naive {median:.3f}")
    if summary["least_skill"]:
        worst = ", ".join(
            f"{w['series_id']} ({w['skill_over_naive']:.3f})" for w in summary["least_skill"]
        )
        lines.append(f"least skill: {worst}")
    return lines
