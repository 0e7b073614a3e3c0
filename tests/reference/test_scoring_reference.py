"""Published checks of the accuracy measures (tests/reference/README.md, scoring rows)."""

from __future__ import annotations

import numpy as np
import pytest

from service.core.evaluation.scoring import interval_score, mae, mase, mase_scale

TRAIN = np.array([3.0, 5.0, 4.0, 6.0, 8.0, 7.0])
TEST = np.array([9.0, 8.0])
FORECAST = np.array([7.0, 7.0])


def test_mase_scale_non_seasonal() -> None:
    # SOURCE: Hyndman & Koehler (2006), README MASE row: scale 1.6.
    assert mase_scale(TRAIN, 1) == pytest.approx(1.6, abs=1e-12)


def test_mae_and_mase() -> None:
    # SOURCE: Hyndman & Koehler (2006), README MASE row: MAE 1.5, MASE 0.9375.
    assert mae(TEST, FORECAST) == pytest.approx(1.5, abs=1e-12)
    assert mase(TEST, FORECAST, mase_scale(TRAIN, 1)) == pytest.approx(0.9375, abs=1e-12)


def test_mase_scale_seasonal() -> None:
    # SOURCE: Hyndman & Koehler (2006), README MASE row: seasonal m = 2 scale 1.75.
    assert mase_scale(TRAIN, 2) == pytest.approx(1.75, abs=1e-12)


@pytest.mark.parametrize(("actual", "expected"), [(15.0, 10.0), (8.0, 90.0), (23.0, 130.0)])
def test_interval_score(actual: float, expected: float) -> None:
    # SOURCE: Winkler (1972); Gneiting & Raftery (2007); README row: [10, 20] at 95 %.
    score = interval_score(np.array([actual]), np.array([10.0]), np.array([20.0]), 0.95)
    assert score == pytest.approx(expected, abs=1e-9)
