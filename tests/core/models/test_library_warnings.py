"""One capture of library warnings, with one set of codes, for every fit and job."""

from __future__ import annotations

import warnings

import pytest
from statsmodels.tools.sm_exceptions import ConvergenceWarning, ValueWarning

from service.core.models.base import FitWarning
from service.core.models.library_warnings import captured


@pytest.mark.parametrize(
    ("category", "code"),
    [
        (ConvergenceWarning, "convergence"),
        (RuntimeWarning, "numerical"),
        (ValueWarning, "library_warning"),
        (UserWarning, "library_warning"),
    ],
)
def test_each_category_gets_its_code(category: type[Warning], code: str) -> None:
    found: list[FitWarning] = []
    with captured(found, "ETS(A,N,N)"):
        warnings.warn("first line\nsecond line", category, stacklevel=1)
    assert found == [FitWarning(code, f"ETS(A,N,N): {category.__name__}: first line")]


def test_repeats_are_kept_once_and_a_failing_block_keeps_its_warnings() -> None:
    found: list[FitWarning] = []
    with pytest.raises(ArithmeticError), captured(found):
        for _ in range(3):
            warnings.warn("did not converge", ConvergenceWarning, stacklevel=1)
        raise ArithmeticError("gave up")
    assert found == [FitWarning("convergence", "ConvergenceWarning: did not converge")]
