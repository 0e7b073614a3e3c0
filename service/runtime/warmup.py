"""Warm-up for the fork server: imported once there (the pool's preload list) before any
worker is forked, so that every worker starts with what a request needs already loaded.

It pins BLAS to one thread, then imports the jobs module, which imports the statistics
(numpy, pandas, scipy, statsmodels, the model registry): that is what the first request of a
cold process paid. Running automatic forecasts here as well, as an earlier warm-up did, cost
seconds of CPU at every start and gave no first-request gain measurable beside the import
(tests/benchmarks/RESULTS.md, "Start-up"). Nothing here may raise: a failed import is paid
again by the first request instead.
"""

from __future__ import annotations

import contextlib
import importlib

from service.runtime.workers import pin_threads

# Modules a forecast still imports on first use after the jobs module (pandas' pyarrow glue).
LAZY_MODULES = ("service.runtime.jobs", "pyarrow.pandas_compat")

# With the libraries' default thread pools, statsmodels' many tiny linear-algebra calls ran
# several times slower on two cores; the workers forked from here inherit the pinned pools.
pin_threads()

for _name in LAZY_MODULES:
    with contextlib.suppress(Exception):  # a warm-up must never stop the fork server
        importlib.import_module(_name)
