"""Decision and detection limits of a logistic calibration (Hubaux & Vos 1970, from memory,
read through the delta-method band).

Oracle: an independent evaluation with the numpy four-parameter logistic of
tests/core/nonlinear/builtin_designs.py, its parameter gradient by central finite
differences, scipy's Student t quantiles and scipy's brentq on a bracket found by a
brute-force scan; the service's limits must agree to 1e-6 relative. The series are seeded
invented designs (demo data).
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import optimize, stats

from service.core import ModelSpec, fit_series
from service.core.models.curve_figures import figures_of_merit
from tests.core.nonlinear.builtin_designs import cases, log4


def _fitted(seed: int):
    case = cases("logistic4", 1, seed)[0]
    fitted = fit_series(case.x, case.y, model=ModelSpec(family="logistic4",
                                                        scale="log")).model
    assert fitted.parameter_names == ("y_left", "y_right", "slope", "ec50")
    return fitted


def _reading_sd(fitted, x: float) -> float:
    theta = np.asarray(fitted.estimates)
    steps = 1e-6 * np.maximum(np.abs(theta), 1e-3)
    grad = np.empty(theta.size)
    for j, h in enumerate(steps):
        up, down = theta.copy(), theta.copy()
        up[j] += h
        down[j] -= h
        grad[j] = (log4(x, *up) - log4(x, *down)) / (2 * h)
    return float(np.sqrt(grad @ fitted.covariance @ grad + fitted.sigma ** 2))


def _root(fn, top: float) -> float:
    xs = np.geomspace(top * 1e-9, top, 20001)
    values = np.array([fn(x) for x in xs])
    i = int(np.flatnonzero(values >= 0)[0])
    return optimize.brentq(fn, xs[i - 1], xs[i], xtol=1e-300, rtol=1e-15)


@pytest.mark.parametrize("seed", [11, 12])
def test_decision_and_detection_limits_match_an_independent_evaluation(seed):
    fitted = _fitted(seed)
    alpha, beta = 0.05, 0.01
    figures = figures_of_merit(fitted, alpha=alpha, beta=beta)
    assert figures.available, figures.reason
    theta = fitted.estimates
    f0 = log4(0.0, *theta)
    sign = 1.0 if theta[1] > theta[0] else -1.0  # rising when y_right > y_left
    df = fitted.df_residual
    critical = stats.t.ppf(1 - alpha, df) * _reading_sd(fitted, 0.0)
    np.testing.assert_allclose(figures.decision_level_y, f0 + sign * critical, rtol=1e-6)

    def signal(x):
        return sign * (log4(x, *theta) - f0)

    x_c = _root(lambda x: signal(x) - critical, fitted.x_max)
    x_d = _root(lambda x: signal(x) - stats.t.ppf(1 - beta, df) * _reading_sd(fitted, x)
                - critical, fitted.x_max)
    lod = _root(lambda x: signal(x) - 3.3 * fitted.sigma, fitted.x_max)
    np.testing.assert_allclose(figures.decision_limit, x_c, rtol=1e-6)
    np.testing.assert_allclose(figures.detection_limit, x_d, rtol=1e-6)
    np.testing.assert_allclose(figures.detection_limit_ich, lod, rtol=1e-6)
    assert figures.decision_limit < figures.detection_limit


def test_a_peak_has_no_figures():
    case = cases("gaussian_peak", 1, 11)[0]
    fitted = fit_series(case.x, case.y, model=ModelSpec(family="gaussian_peak")).model
    figures = figures_of_merit(fitted)
    assert not figures.available and figures.reason
    assert np.isnan(figures.detection_limit)
