"""Shared helpers of the calibration (inverse prediction) tests: fits and a closed-form oracle."""

from __future__ import annotations

import numpy as np
import statsmodels.api as sm
from scipy import stats

from service.core import FitOptions, ModelSpec, fit_series
from tests.conftest import load_nist

LEAN = FitOptions(grid=None, include=frozenset({"fitted_model"}))


def fit_model(x, y, degree, **model):
    return fit_series(x, y, model=ModelSpec(degree=degree, **model), options=LEAN).model


def nist_fit(name, degree):
    ref = load_nist(name)
    x, y = np.asarray(ref["data"]["x"], float), np.asarray(ref["data"]["y"], float)
    return x, y, fit_model(x, y, degree)


# Straight line: Fieller-type closed form (Draper & Smith, Applied Regression Analysis,
# 3rd ed., sec. 3.2, "inverse regression"; formula from memory).
def fieller_interval(x, y, y0, m, level):
    """Closed-form classical calibration interval for a straight line, via statsmodels OLS."""
    ols = sm.OLS(y, sm.add_constant(x)).fit()
    b0, b1 = ols.params
    s = np.sqrt(ols.scale)
    n, xbar = len(x), x.mean()
    sxx = np.sum((x - xbar) ** 2)
    q = stats.t.ppf(0.5 + level / 2, n - 2)
    x0 = (y0 - b0) / b1
    g = q**2 * s**2 / (b1**2 * sxx)
    half = q * s / abs(b1) * np.sqrt((1 - g) * (1 / m + 1 / n) + (x0 - xbar) ** 2 / sxx)
    centre = x0 + g * (x0 - xbar) / (1 - g)
    return x0, centre - half / (1 - g), centre + half / (1 - g)
