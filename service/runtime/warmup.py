"""Warm-up for the fork server: imported once there (the pool's preload list), it runs the
code paths of an automatic forecast so that lazy imports and first-call costs inside numpy,
scipy and statsmodels are paid before any worker is forked, not by the first request of each
worker.

Two small seeded series cover what ``auto`` runs: a positive monthly seasonal one (diagnostics,
the seasonal ETS search with additive and multiplicative models, simulated and analytic
intervals, Theta, the quick seasonal ARIMA search, calibration, the combination refit) and a
non-seasonal trending one (the SES/Holt/damped combination, non-seasonal ARIMA).
Measured on a 200-point monthly series: the first `auto` in a fresh process took 1.27 s
against 1.03 s warm before any warm-up. Nothing here may raise: a failed warm-up only costs
that time back.
"""

from __future__ import annotations

import warnings

from service.runtime.pool import pin_threads

# The fork server runs this before any worker exists: with the libraries' default thread
# pools, statsmodels' many tiny linear-algebra calls here ran several times slower on two
# cores, and the workers forked from it inherit the pinned pools.
pin_threads()

import service.runtime.jobs  # noqa: E402, F401  (what every worker needs, imported once here)


def warm() -> None:
    """Diagnostics and an automatic forecast on a seasonal and on a non-seasonal series."""
    import numpy as np
    import pandas as pd

    from service.core.diagnostics.report import diagnose
    from service.core.selection.auto import select

    rng = np.random.default_rng(0)
    t = np.arange(72)
    seasonal = 50 + 0.2 * t + 5 * np.sin(2 * np.pi * t / 12) + rng.normal(0, 1, t.size)
    trending = 20 + 0.3 * t + rng.normal(0, 1, t.size).cumsum()
    index = pd.date_range("2020-01-01", periods=t.size, freq="MS")
    for values, period in ((seasonal, 12), (trending, 1)):
        y = pd.Series(values, index=index)
        select(y, period, 6, (0.8, 0.95), diagnostics=diagnose(y, period))


try:
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        warm()
except Exception:  # a warm-up must never stop the fork server
    pass
