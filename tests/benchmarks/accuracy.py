"""Accuracy of model "auto" against classical benchmarks on last-h holdouts of open series.

Run: python -m tests.benchmarks.accuracy [--panel issue|more|extra|all] [--cuts 0,1,2]
     [--fresh] [NAME ...]

Every series of tests/benchmarks/accuracy_series.py (three panels of open series and seeded
synthetic ones), at one or more holdout cuts (cut K ends every series K·h/2 points earlier;
a series with fewer than 3h points left is skipped); names restrict the series. Methods in
the same run: auto (diagnostics + select, as POST /v1/forecasts runs it with the default
seasonal periods of the series' step, several where the history holds two cycles of each),
naive, seasonal naive, Theta, ETS by AICc, damped-trend ETS (additive trend, damped, the rest
by AICc), the M4 SES/Holt/damped combination on classically deseasonalised data, and seasonal
ARIMA by the stepwise AICc search (period 1 for seasons of 24 and more, as auto does).

Reported by frequency group and overall, per cut and over all cuts: mean and median MASE of
every method; for auto the ratio of its mean MASE to the best benchmark's, the geometric mean
of its per-series MASE ratio to each benchmark, the count of series worse than 1.5 x the
better of naive and seasonal naive, coverage at 80 % and 95 %, the mean scaled interval score
(MSIS, 95 %) of every method, refusals, the rows that move auto's mean most against the best
benchmark, and auto's seconds per call by stage. MASE and MSIS are scaled by the in-sample
seasonal naive MAE at the series' own period (M4 convention).

The benchmarks do not change when auto does: their scores are kept in
``tests/benchmarks/.cache`` keyed by the series, the method and the source of the families
they use (``--fresh`` ignores it). Auto is always run. Dated results go to RESULTS.md.
"""

from __future__ import annotations

import hashlib
import os
import pickle
import sys
import time
import warnings
from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd

from service.core.data.periods import default_periods, whole_period
from service.core.diagnostics.report import diagnose
from service.core.evaluation.scoring import coverage, mase, mase_scale, msis
from service.core.models.arima.family import ArimaSpec
from service.core.models.base import Forecast
from service.core.models.combination import CombinationSpec
from service.core.models.ets.family import EtsSpec
from service.core.models.intervals import Interval
from service.core.models.naive import NaiveSpec
from service.core.models.seasonal_naive import SeasonalNaiveSpec
from service.core.models.theta import ThetaSpec
from service.core.selection.auto import select
from service.core.selection.candidates import seasonality_test
from service.runtime.workers import pin_threads
from tests.benchmarks.accuracy_series import PANELS, Case, earlier

LEVELS = (0.8, 0.95)
CACHE = Path(__file__).parent / ".cache"
GROUPS = ("yearly", "quarterly", "monthly", "weekly", "daily", "hourly", "sub-hourly")

Method = Callable[[pd.Series, int, int], Forecast]


def auto(y: pd.Series, m: int, h: int) -> Forecast:
    """What POST /v1/forecasts does with model "auto" and the default seasonal periods (the
    step's, each kept with two full cycles of history: hourly [24, 168], daily [7, 365.25]);
    ``m`` (the benchmarks' period) is not passed on. Stage seconds are kept in STAGES."""
    periods = default_periods(y.index.freq, len(y))
    period = whole_period(periods)
    report = diagnose(y, period, periods=periods)
    chosen = select(y, period, h, LEVELS, diagnostics=report)
    STAGES.append(dict(chosen.seconds))
    return chosen.forecast


STAGES: list[dict[str, float]] = []


def seasonal_naive(y: pd.Series, m: int, h: int) -> Forecast:
    spec = SeasonalNaiveSpec() if m > 1 else NaiveSpec()
    return spec.fit(y, m).forecast(h, LEVELS)


def naive(y: pd.Series, m: int, h: int) -> Forecast:
    return NaiveSpec().fit(y, 1).forecast(h, LEVELS)


def ets(y: pd.Series, m: int, h: int) -> Forecast:
    return EtsSpec().fit(y, m if m <= 24 else 1).forecast(h, LEVELS)


def damped_ets(y: pd.Series, m: int, h: int) -> Forecast:
    spec = EtsSpec(trend="add", damped=True)
    return spec.fit(y, m if m <= 24 else 1).forecast(h, LEVELS)


def theta(y: pd.Series, m: int, h: int) -> Forecast:
    return ThetaSpec().fit(y, m).forecast(h, LEVELS)


def arima(y: pd.Series, m: int, h: int) -> Forecast:
    return ArimaSpec().fit(y, m if m < 24 else 1).forecast(h, LEVELS)


def m4_combination(y: pd.Series, m: int, h: int) -> Forecast:
    """SES, Holt and damped Holt averaged, on deseasonalised data when the M4 test says so."""
    from statsmodels.tsa.seasonal import seasonal_decompose

    values = y.to_numpy(dtype=float)
    index = np.ones(m)
    adjusted = y
    seasonal = m > 1 and np.all(values > 0) and seasonality_test(values, m)
    if seasonal:
        parts = seasonal_decompose(values, model="multiplicative", period=m)
        index = np.asarray(parts.seasonal[:m], dtype=float)
        adjusted = y / np.resize(index, values.size)
    members = (
        EtsSpec("add", "none", False, "none"),
        EtsSpec("add", "add", False, "none"),
        EtsSpec("add", "add", True, "none"),
    )
    fc = CombinationSpec(members=members).fit(adjusted, 1).forecast(h, LEVELS)
    if not seasonal:
        return fc
    future = np.resize(index, values.size + h)[values.size :]
    intervals = tuple(
        Interval(iv.coverage, iv.lower * future, iv.upper * future) for iv in fc.intervals
    )
    return Forecast(fc.index, fc.point * future, intervals)


METHODS: dict[str, Method] = {
    "auto": auto,
    "naive": naive,
    "seasonal naive": seasonal_naive,
    "theta": theta,
    "ets (AICc)": ets,
    "damped ets": damped_ets,
    "ses/holt/damped": m4_combination,
    "arima (stepwise)": arima,
}
BENCHMARKS = [m for m in METHODS if m != "auto"]


@dataclass(frozen=True)
class Score:
    mase: float
    coverage: dict[float, float]
    msis: float
    seconds: float
    refused: bool = False


FAILED = Score(np.nan, dict.fromkeys(LEVELS, np.nan), np.nan, np.nan, True)


def score(case: Case, method: Method) -> Score:
    train, test = case.y.iloc[: -case.horizon], case.y.iloc[-case.horizon :]
    train = train.interpolate(limit_direction="both")
    train.index.freq = case.y.index.freq
    start = time.perf_counter()
    with warnings.catch_warnings():
        # Library warnings are reported by the families; here only the scores matter.
        warnings.simplefilter("ignore")
        fc = method(train, case.period, case.horizon)
    seconds = time.perf_counter() - start
    actual = test.to_numpy(dtype=float)
    scale = mase_scale(train.to_numpy(dtype=float), case.period)
    by_level = {iv.coverage: iv for iv in fc.intervals}
    return Score(
        mase=mase(actual, fc.point, scale),
        coverage={v: coverage(actual, by_level[v].lower, by_level[v].upper) for v in LEVELS},
        msis=msis(actual, by_level[0.95].lower, by_level[0.95].upper, 0.95, scale),
        seconds=seconds,
    )


AUTO_ONLY = frozenset(
    {
        "selection",
        "evaluation",
        "candidates",
        "choice",
        "calibration",
        "averaging",
        "origins",
        "backtest",
        "plausibility",
        "summary",
    }
)
"""Modules only auto uses: a change there leaves the benchmarks' scores valid."""


def _code_fingerprint() -> str:
    """The source of the model families and the library versions: a benchmark's score stays
    valid while these do not change."""
    import scipy
    import statsmodels

    digest = hashlib.sha256()
    root = Path(__file__).resolve().parents[2] / "service" / "core"
    for path in sorted(root.rglob("*.py")):
        if not AUTO_ONLY.intersection({*path.parts, path.stem}):
            digest.update(path.read_bytes())
    for version in (np.__version__, pd.__version__, scipy.__version__, statsmodels.__version__):
        digest.update(version.encode())
    return digest.hexdigest()[:16]


def cached_score(case: Case, name: str, fingerprint: str, fresh: bool) -> Score:
    """A benchmark's score from the cache, computed and stored when missing."""
    key = hashlib.sha256()
    for part in (name, case.name, str(case.period), str(case.horizon), fingerprint):
        key.update(part.encode() + b"\0")
    key.update(case.y.to_numpy(dtype=float).tobytes())
    key.update(case.y.index.asi8.tobytes())
    path = CACHE / f"{key.hexdigest()[:32]}.pkl"
    if not fresh and path.exists():
        loaded: Score = pickle.loads(path.read_bytes())
        return loaded
    result = score(case, METHODS[name])
    CACHE.mkdir(exist_ok=True)
    path.write_bytes(pickle.dumps(result))
    return result


@dataclass
class Rows:
    """Scores of every method for a set of (case, cut) rows."""

    cases: list[tuple[Case, int]] = field(default_factory=list)
    scores: dict[str, list[Score]] = field(default_factory=lambda: {m: [] for m in METHODS})

    def subset(self, keep: Callable[[Case, int], bool]) -> Rows:
        out = Rows()
        for k, (case, cut) in enumerate(self.cases):
            if keep(case, cut):
                out.cases.append((case, cut))
                for m in METHODS:
                    out.scores[m].append(self.scores[m][k])
        return out

    def mases(self, method: str) -> np.ndarray:
        return np.array([s.mase for s in self.scores[method]], dtype=float)


def geomean_ratio(a: np.ndarray, b: np.ndarray) -> float:
    """The geometric mean of a / b over the pairs where both are finite and positive."""
    keep = np.isfinite(a) & np.isfinite(b) & (a > 0) & (b > 0)
    return float(np.exp(np.mean(np.log(a[keep] / b[keep])))) if keep.any() else float("nan")


def scored(rows: Rows) -> Rows:
    """The rows every method scored (a refusal or failure is counted, not averaged)."""
    finite = np.all([np.isfinite(rows.mases(m)) for m in METHODS], axis=0)
    flags = iter(finite.tolist() if rows.cases else [])
    return rows.subset(lambda _c, _k: next(flags))


def figures(all_rows: Rows) -> dict[str, float]:
    """Auto's figures against the benchmarks over the rows every method scored."""
    rows = scored(all_rows)
    auto_mase = rows.mases("auto")
    means = {m: float(np.nanmean(rows.mases(m))) for m in METHODS}
    medians = {m: float(np.nanmedian(rows.mases(m))) for m in METHODS}
    best = min(BENCHMARKS, key=lambda m: means[m])
    simple = np.fmin(rows.mases("naive"), rows.mases("seasonal naive"))
    out = {
        "series": float(len(rows.cases)),
        "mean": means["auto"],
        "median": medians["auto"],
        "best": float(BENCHMARKS.index(best)),
        "mean/best": means["auto"] / means[best],
        "median/best": medians["auto"] / min(medians[m] for m in BENCHMARKS),
        "worse1.5": float(np.sum(auto_mase > 1.5 * simple)),
        "refused": float(sum(s.refused for s in all_rows.scores["auto"])),
        "dropped": float(len(all_rows.cases) - len(rows.cases)),
    }
    for m in BENCHMARKS:
        out[f"gm/{m}"] = geomean_ratio(auto_mase, rows.mases(m))
    for level in LEVELS:
        out[f"cov{level:g}"] = float(np.nanmean([s.coverage[level] for s in rows.scores["auto"]]))
    for m in METHODS:
        out[f"msis/{m}"] = float(np.nanmean([s.msis for s in rows.scores[m]]))
    return out


def report(rows: Rows, title: str) -> None:
    """Mean / median MASE of every method and auto's figures, by frequency group."""
    groups = [g for g in GROUPS if any(c.group == g for c, _ in rows.cases)]
    parts = [(g, rows.subset(lambda c, _, g=g: c.group == g)) for g in groups]
    parts.append(("all", rows))
    dropped = len(rows.cases) - len(scored(rows).cases)
    print(f"\n{title} ({dropped} rows left out where a method failed)")
    print(f"{'group':11s} {'n':>3s} " + " ".join(f"{m[:15]:>15s}" for m in METHODS))
    for name, part in parts:
        common = scored(part)
        cells = [
            f"{np.mean(common.mases(m)):7.3f}/{np.median(common.mases(m)):<7.3f}" for m in METHODS
        ]
        print(f"{name:11s} {len(part.cases):3d} " + " ".join(f"{c:>15s}" for c in cells))
    print("(mean/median MASE)   MSIS 95 %:")
    for name, part in parts:
        f = figures(part)
        print(f"{name:11s} {'':3s} " + " ".join(f"{f['msis/' + m]:15.2f}" for m in METHODS))
    header = (
        f"{'group':11s} {'n':>3s} {'mean/best':>9s} {'med/best':>8s} "
        + " ".join(f"{'gm/' + m[:9]:>12s}" for m in BENCHMARKS)
        + f" {'>1.5x':>5s} {'cov80':>6s} {'cov95':>6s} {'refused':>7s}"
    )
    print(header)
    for name, part in parts:
        f = figures(part)
        print(
            f"{name:11s} {len(part.cases):3d} {f['mean/best']:9.3f} {f['median/best']:8.3f} "
            + " ".join(f"{f['gm/' + m]:12.3f}" for m in BENCHMARKS)
            + f" {int(f['worse1.5']):5d} {100 * f['cov0.8']:6.1f} {100 * f['cov0.95']:6.1f}"
            + f" {int(f['refused']):7d}"
        )


def targets(rows: Rows) -> None:
    """Auto against the targets of issue 13, over every row given."""
    f = figures(rows)
    best = BENCHMARKS[int(f["best"])]
    msis_best = min(f[f"msis/{m}"] for m in BENCHMARKS)
    lines = [
        (f"mean MASE / best benchmark ({best})", f["mean/best"], "<= 0.92"),
        ("geometric-mean ratio to ETS by AICc", f["gm/ets (AICc)"], "<= 0.92"),
        ("geometric-mean ratio to stepwise ARIMA", f["gm/arima (stepwise)"], "<= 0.92"),
        ("median MASE / best benchmark median", f["median/best"], "<= 1"),
        ("share worse than 1.5 x naive/seasonal naive", f["worse1.5"] / f["series"], "<= 0.05"),
        ("coverage 80 %", f["cov0.8"], "0.77-0.83"),
        ("coverage 95 %", f["cov0.95"], "0.92-0.98"),
        ("MSIS / lowest benchmark MSIS", f["msis/auto"] / msis_best, "< 1"),
        ("refusals", f["refused"], "0"),
    ]
    print("\ntargets over every row")
    for name, value, goal in lines:
        print(f"  {name:45s} {value:8.3f}   target {goal}")


def largest_excess(rows: Rows, count: int = 15) -> None:
    """The rows that move auto's mean MASE most against the best benchmark's (by mean over
    every row): a few large-MASE rows dominate a mean ratio, so this is where to look."""
    common = scored(rows)
    if not common.cases:
        return
    f = figures(rows)
    best = BENCHMARKS[int(f["best"])]
    excess = common.mases("auto") - common.mases(best)
    share = excess / len(common.cases) / float(np.mean(common.mases(best)))
    print(f"\nrows moving auto's mean most against {best} (share: its part of mean/best - 1)")
    print(f"{'series':24s} {'cut':>3s} {'auto':>7s} {best[:10]:>10s} {'share':>7s}")
    for k in np.argsort(-excess)[:count]:
        case, cut = common.cases[k]
        print(
            f"{case.name:24s} {cut:3d} {common.mases('auto')[k]:7.3f} "
            f"{common.mases(best)[k]:10.3f} {share[k]:+7.4f}"
        )


def stage_seconds() -> None:
    """Auto's seconds per call: median and total by stage."""
    if not STAGES:
        return
    totals = np.array([sum(s.values()) for s in STAGES])
    names = sorted({k for s in STAGES for k in s})
    by_stage = ", ".join(f"{k} {sum(s.get(k, 0.0) for s in STAGES):.1f}" for k in names)
    print(
        f"\nauto seconds per call (select only): median {np.median(totals):.2f}, "
        f"max {totals.max():.2f}; total by stage: {by_stage}"
    )


def main(args: list[str]) -> None:
    panel, cuts, fresh = "all", [0], False
    while args[:1] in (["--panel"], ["--cuts"], ["--cut"], ["--fresh"]):
        if args[0] == "--fresh":
            fresh, args = True, args[1:]
            continue
        if args[0] == "--panel":
            panel = args[1]
        else:
            cuts = [int(c) for c in args[1].split(",")]
        args = args[2:]
    names = args
    panels = list(PANELS) if panel == "all" else [panel]
    # ACCURACY_CACHE_KEY shares the benchmarks' scores between two trees whose families differ
    # only where the benchmarks do not reach (e.g. before and after a change to auto).
    fingerprint = os.environ.get("ACCURACY_CACHE_KEY") or _code_fingerprint()
    print(f"load average at start: {os.getloadavg()}, cores: {os.cpu_count()}")
    rows = Rows()
    print(
        f"{'series':24s} {'cut':>3s} {'n':>5s} {'m':>3s} {'h':>3s} "
        + " ".join(f"{m[:10]:>10s}" for m in METHODS)
        + "  auto s"
    )
    for cut in cuts:
        for name in panels:
            for base in PANELS[name]():
                case = earlier(base, cut)
                if case is None or (names and base.name.split(".")[0] not in names):
                    continue
                rows.cases.append((case, cut))
                for method in METHODS:
                    try:
                        if method == "auto":
                            s = score(case, auto)
                        else:
                            s = cached_score(case, method, fingerprint, fresh)
                    except Exception as exc:  # reported, not fatal to the run
                        print(f"  {case.name}: {method} failed: {type(exc).__name__}: {exc}")
                        s = FAILED
                    rows.scores[method].append(s)
                cells = " ".join(f"{rows.scores[m][-1].mase:10.3f}" for m in METHODS)
                print(
                    f"{case.name:24s} {cut:3d} {len(case.y):5d} {case.period:3d} "
                    f"{case.horizon:3d} {cells}  {rows.scores['auto'][-1].seconds:6.2f}",
                    flush=True,
                )
    for cut in cuts:
        report(rows.subset(lambda _, k, cut=cut: k == cut), f"cut {cut}")
    if len(cuts) > 1:
        report(rows, f"all cuts ({', '.join(map(str, cuts))}) together")
    targets(rows)
    largest_excess(rows)
    stage_seconds()
    print(f"load average at end: {os.getloadavg()}")


if __name__ == "__main__":
    # One BLAS thread, as in the service's workers (seconds are comparable with theirs).
    pin_threads()
    main(sys.argv[1:])
