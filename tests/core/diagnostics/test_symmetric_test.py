"""The weighted symmetric test: its tables reproduce from their seed, its size is its level."""

from __future__ import annotations

import numpy as np
import pytest

from service.core.diagnostics import symmetric_test as st

HUNDRED = st.LENGTHS.index(100)


def test_the_statistic_is_the_weighted_symmetric_estimator() -> None:
    y = np.array([1.0, 3.0, 2.0, 5.0, 4.0, 6.0, 8.0, 7.0])
    z = y - y.mean()
    rho = (z[1:] @ z[:-1]) / (z[1:-1] @ z[1:-1] + z @ z / y.size)
    statistic, coefficient = st.statistic(y, "c")
    assert coefficient == pytest.approx(rho, rel=1e-12)
    assert statistic == pytest.approx(y.size * (rho - 1.0), rel=1e-12)


@pytest.mark.parametrize("terms", ["c", "ct"])
def test_the_critical_value_surface_fits_its_simulation(terms: st.Terms) -> None:
    simulated = st.simulated_quantiles(HUNDRED, terms)
    fitted = [st.critical_value(terms, level, 100) for level in st.LEVELS]
    np.testing.assert_allclose(fitted, simulated, atol=0.5)


def test_the_power_table_reproduces_from_its_seed() -> None:
    critical = st.critical_value("c", st.POWER_LEVEL["c"], 100)
    assert (
        st.simulated_power_coefficient(HUNDRED, "c", critical) == st.DISTINGUISHABLE["c"][HUNDRED]
    )


@pytest.mark.parametrize("terms", ["c", "ct"])
def test_the_size_is_the_level_on_fresh_random_walks(terms: st.Terms) -> None:
    rng = np.random.default_rng(404)
    walks = np.cumsum(rng.standard_normal((4000, 120)), axis=1)
    statistics = np.array([st.statistic(w, terms)[0] for w in walks])
    share = float(np.mean(statistics < st.critical_value(terms, 0.05, 120)))
    assert 0.04 <= share <= 0.06  # 4,000 walks: the standard error is 0.0034


def test_power_grows_with_the_length_and_the_half_life_reads_it() -> None:
    coefficients = [st.distinguishable_coefficient("c", n) for n in (50, 100, 500, 5000, 50000)]
    assert coefficients == sorted(coefficients)
    assert coefficients[-1] == st.DISTINGUISHABLE["c"][-1]
    assert st.half_life(0.5) == pytest.approx(1.0)
    assert st.half_life(1.0) is None
