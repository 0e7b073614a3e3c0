"""Fourier terms of a dynamic harmonic regression and the harmonics per period by AICc."""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from service.core.data.periods import period_text

MAX_HARMONICS = 12
"""Per period; FPP's examples stop near 10 for weekly and yearly cycles."""
MAX_AR = 3
MAX_MA = 2
"""The largest AR and MA orders of the errors (errors.py searches up to them)."""


def max_harmonics(period: float) -> int:
    """Pairs whose frequency stays below the Nyquist limit, at most MAX_HARMONICS."""
    return max(1, min(MAX_HARMONICS, math.ceil(period / 2) - 1))


@dataclass(frozen=True)
class FourierTerms:
    """The sine and cosine columns of the chosen harmonics (a constant first)."""

    periods: tuple[float, ...]
    harmonics: tuple[int, ...]

    def kept(self) -> list[tuple[int, int, float]]:
        """Each sine and cosine pair of the design, in column order: the period's position,
        the harmonic k and the cycles per step. A frequency already present (a harmonic of
        two periods) or at or past the Nyquist limit is left out."""
        seen: list[float] = []
        out: list[tuple[int, int, float]] = []
        for i, (p, count) in enumerate(zip(self.periods, self.harmonics, strict=True)):
            for k in range(1, count + 1):
                f = k / p
                if any(abs(f - s) < 1e-9 for s in seen) or f >= 0.5:
                    continue
                seen.append(f)
                out.append((i, k, f))
        return out

    def frequencies(self) -> list[tuple[str, float]]:
        """Column names and cycles per step, repeated frequencies left out."""
        return [(f"{k}/{period_text(self.periods[i])}", f) for i, k, f in self.kept()]

    def names(self) -> list[str]:
        """Coefficient names: constant, then sin and cos per harmonic."""
        return ["constant"] + [
            f"{trig} {name}" for name, _ in self.frequencies() for trig in ("sin", "cos")
        ]

    def matrix(self, t: np.ndarray) -> np.ndarray:
        """The design at positions ``t`` (steps from the first fitted observation)."""
        cols = [np.ones_like(t)]
        for _, f in self.frequencies():
            angle = 2.0 * np.pi * f * t
            cols += [np.sin(angle), np.cos(angle)]
        return np.column_stack(cols)


def aicc(rss: float, n: int, k: int) -> float:
    """AICc (statsmodels') of a Gaussian regression with k coefficients plus the variance,
    from its concentrated log-likelihood."""
    from statsmodels.tools import eval_measures

    if rss <= 0:
        return math.inf
    loglik = -0.5 * n * (math.log(2.0 * math.pi * rss / n) + 1.0)
    return float(eval_measures.aicc(loglik, n, k + 1))


def choose_harmonics(
    values: np.ndarray, t: np.ndarray, periods: tuple[float, ...]
) -> tuple[int, ...]:
    """Harmonics per period by AICc of least squares, one period at a time until stable."""
    full = FourierTerms(periods, tuple(max_harmonics(p) for p in periods))
    x = full.matrix(t)
    gram, cross, total = x.T @ x, x.T @ values, float(values @ values)
    columns = _columns_by_period(full)
    n = values.size

    def score(counts: tuple[int, ...]) -> float:
        keep = [0] + [c for i, k in enumerate(counts) for c in columns[i][: 2 * k]]
        g, c = gram[np.ix_(keep, keep)], cross[keep]
        try:
            b = np.linalg.solve(g, c)
        except np.linalg.LinAlgError:
            return math.inf
        return aicc(max(total - float(b @ c), 1e-12 * total), n, len(keep))

    counts = tuple(1 for _ in periods)
    best = score(counts)
    for _ in range(4):
        changed = False
        for i, p in enumerate(periods):
            for k in range(1, max_harmonics(p) + 1):
                trial = (*counts[:i], k, *counts[i + 1 :])
                value = score(trial)
                if value < best - 1e-9:
                    counts, best, changed = trial, value, True
        if not changed:
            break
    return counts


def _columns_by_period(terms: FourierTerms) -> list[list[int]]:
    """The design's column numbers of each period's harmonics, in harmonic order."""
    out: list[list[int]] = [[] for _ in terms.periods]
    for pair, (i, _, _) in enumerate(terms.kept()):
        out[i] += [1 + 2 * pair, 2 + 2 * pair]
    return out
