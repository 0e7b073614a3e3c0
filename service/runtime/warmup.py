"""Warm-up for the fork server: imported once there (the pool's preload list) before any
worker is forked, so that every worker starts with what a request needs already loaded.

It pins BLAS to one thread, then imports what a job runs: the jobs module, every module of
``service.core`` (the families' implementations are loaded lazily by the specifications, so
that the HTTP server reads the catalogue without statsmodels; importing the jobs module alone
no longer brings them) and the library modules that core imports inside functions
(``LIBRARY_MODULES``; tests/runtime/test_warmup.py checks it against the source). It runs no
forecast: the imports are the first request's cost, and running automatic forecasts here as
well gave no first-request gain beside them (tests/benchmarks/RESULTS.md, "Start-up").
Nothing here may raise: a failed import is paid again by the first request instead.
"""

from __future__ import annotations

import contextlib
import importlib
import pkgutil

from service.runtime.workers import pin_threads

LIBRARY_MODULES = (
    "scipy.linalg",
    "scipy.optimize",
    "scipy.signal",
    "scipy.sparse",
    "scipy.special",
    "scipy.stats",
    "statsmodels.nonparametric.smoothers_lowess",
    "statsmodels.tools.eval_measures",
    "statsmodels.tools.sm_exceptions",
    "statsmodels.tsa.adfvalues",
    "statsmodels.tsa.seasonal",
    "statsmodels.tsa.stattools",
    # pandas' pyarrow glue, which a forecast imports on first use.
    "pyarrow.pandas_compat",
)


def warm_modules() -> list[str]:
    """The jobs module, every module of service.core, then ``LIBRARY_MODULES``."""
    import service.core

    core = [m.name for m in pkgutil.walk_packages(service.core.__path__, "service.core.")]
    return ["service.runtime.jobs", *core, *LIBRARY_MODULES]


# With the libraries' default thread pools, statsmodels' many tiny linear-algebra calls ran
# several times slower on two cores; the workers forked from here inherit the pinned pools.
pin_threads()

with contextlib.suppress(Exception):  # a warm-up must never stop the fork server
    for _name in warm_modules():
        with contextlib.suppress(Exception):
            importlib.import_module(_name)
