"""One story: over seeded simulations of every process in the random-walk benchmark (the table
of issue 20 and the extra rows), no diagnostics response contradicts itself, and the verdicts
land where the targets say.

25 series per row keep this fast; the benchmark (python -m tests.benchmarks.random_walk) runs
300 per row against the targets themselves. The thresholds here are the targets widened by
about 2.5 binomial standard errors at 25 series, so a correct procedure fails them rarely and
a broken one (e.g. the constant-only test of before, which called half the trending series a
random walk) fails them surely.
"""

from __future__ import annotations

import pytest

from tests.benchmarks.random_walk import EXTRA_ROWS, ROWS, Row, run_row

REPLICATIONS = 25
SLACK = 0.12


@pytest.mark.parametrize("row", ROWS + EXTRA_ROWS, ids=lambda r: f"{r.process}, n={r.length}")
def test_no_response_contradicts_itself(row: Row) -> None:
    outcome = run_row(row, REPLICATIONS, seed=20)
    assert outcome.contradictions == 0
    if row.target is None:
        return
    direction, value = row.target
    if direction == ">=":
        assert outcome.share >= value - SLACK, outcome
    else:
        assert outcome.share <= value + SLACK / 2, outcome
