"""Load (or compile and cache) every compiled kernel before a server takes traffic.

The core's loops are compiled by numba on first use and cached on disk (next to
the modules, or in ``NUMBA_CACHE_DIR``): the first process of an install
compiles (tens of seconds), later ones load the machine code (a fraction of a
second). A request must never pay either: a compute deadline could interrupt
the compiler, and readiness checks would time out. Servers call
:func:`warm_up` before serving (``service.runtime.gunicorn_conf.post_worker_init``; the
container image at build time).
"""

from __future__ import annotations

import numpy as np

from service.core.batch.curves import fit_many_curves
from service.core.batch.driver import fit_many
from service.core.checks import durbin_watson
from service.core.polynomial.bands import predict
from service.core.polynomial.fit import fit_series
from service.core.spec import FitOptions, GridSpec, ModelSpec


def warm_up() -> None:
    """Run each code path with compiled loops once, on tiny seeded-free inputs."""
    warm_up_series()
    warm_up_batch()


def warm_up_series() -> None:
    """The loops of one series: the polynomial fit, its bands, the shared diagnostics."""
    x = np.arange(1.0, 13.0)
    y = 1.0 + 0.5 * x + 0.1 * np.sin(3.0 * x)
    weights = np.linspace(0.5, 2.0, x.size)
    report = fit_series(x, y, model=ModelSpec(max_degree=3),
                        options=FitOptions(grid=GridSpec(count=20)))
    fit_series(x, y + 5.0, weights, model=ModelSpec(degree=2, intercept=False,
                                                     transform_x="log"),
               options=FitOptions(grid=GridSpec(count=5)))
    predict(report.model, [1.5, 2.5], level=0.95)
    # a long series takes the CholeskyQR2 path; an exact fit repeats in extended precision
    long_x = np.arange(1.0, 5002.0)
    fit_series(long_x, np.sqrt(long_x), model=ModelSpec(max_degree=3))
    fit_series(x, 2.0 + 3.0 * x, model=ModelSpec(degree=1))
    # the shared diagnostics' Durbin-Watson p-value, called from Python by any family
    durbin_watson.p_value_one(1.5, 10.0, *durbin_watson.bound_traces(13, 3))


def warm_up_batch() -> None:
    """The batch engines' loops: polynomial and nonlinear (every family's branch)."""
    x = np.arange(1.0, 13.0)
    y = 1.0 + 0.5 * x + 0.1 * np.sin(3.0 * x)
    x2, y2 = np.tile(x[:8], 2), np.tile(y[:8], 2)
    fit_many(x2, y2, [8, 8], model=ModelSpec(max_degree=2))
    fit_many(x2, y2, [8, 8], np.ones(16), model=ModelSpec(max_degree=2, intercept=False))
    # the nonlinear batch engine: one call compiles every family's branch of its kernels
    dose = np.repeat(np.geomspace(0.01, 10.0, 6), 2)
    curve = 2.0 + 8.0 / (1.0 + dose) + 0.05 * np.sin(7.0 * dose)
    fit_many_curves(np.tile(dose, 2), np.tile(curve, 2), [12, 12],
                    model=ModelSpec(family="logistic4"))
