"""The solver and its inference against library oracles on seeded demo data.

Oracles:
* scipy.optimize.curve_fit (estimates and pcov; run with the analytic Jacobian
  and tight tolerances so that the oracle itself is accurate to ~1e-10);
  ``absolute_sigma=False`` is the relative weight mode, ``True`` the known-SD mode.
* statsmodels OLS/WLS for a quadratic written as a nonlinear model: a model
  linear in its parameters must reproduce linear least squares exactly.
* scipy.optimize.least_squares(method="trf") for a fit with an active bound.
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest
import statsmodels.api as sm
from scipy.optimize import curve_fit, least_squares

from service.core.nonlinear.inference import infer
from service.core.nonlinear.solver import solve
from tests.core.nonlinear.models import Logistic4, MichaelisMenten, Quadratic, logistic_data

RTOL = 1e-6  # well-conditioned cases (the brief's acceptance level)


def _curve_fit(model, x, y, start, sigma=None, absolute_sigma=False):
    def f(xx, *theta):
        return model.values(xx, np.array(theta))

    def jac(xx, *theta):
        return model.jacobian(xx, np.array(theta))

    return curve_fit(f, x, y, p0=start, jac=jac, sigma=sigma, absolute_sigma=absolute_sigma,
                     ftol=1e-15, xtol=1e-15, gtol=1e-15, maxfev=10000)


def _michaelis_menten(seed=11):
    rng = np.random.default_rng(seed)
    x = np.array([0.25, 0.5, 1.0, 2.0, 4.0, 8.0, 16.0, 32.0] * 2)
    y = MichaelisMenten().values(x, np.array([10.0, 2.0])) + rng.normal(0, 0.3, x.size)
    return x, y


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_logistic_matches_curve_fit(seed):
    x, y, _ = logistic_data(seed)
    model = Logistic4()
    sol = solve(model, x, y, [0.0, 1.0, 3.0, 1.5])
    popt, pcov = _curve_fit(model, x, y, [0.0, 1.0, 3.0, 1.5])
    assert sol.converged and sol.termination == "relative_offset"
    np.testing.assert_allclose(sol.estimates, popt, rtol=RTOL)
    np.testing.assert_allclose(infer(sol).covariance, pcov, rtol=RTOL)


def test_weighted_michaelis_menten_matches_curve_fit_both_modes():
    x, y = _michaelis_menten()
    sd = 0.1 + 0.05 * x  # demo: known measurement SDs
    model = MichaelisMenten()
    sol = solve(model, x, y, [5.0, 1.0], weights=1.0 / sd ** 2)
    for absolute, mode in ((False, "relative"), (True, "known_sd")):
        popt, pcov = _curve_fit(model, x, y, [5.0, 1.0], sigma=sd, absolute_sigma=absolute)
        np.testing.assert_allclose(sol.estimates, popt, rtol=RTOL)
        np.testing.assert_allclose(infer(sol, weight_mode=mode).covariance, pcov, rtol=RTOL)


@pytest.mark.parametrize("weighted", [False, True])
def test_quadratic_equals_statsmodels(weighted):
    rng = np.random.default_rng(5)
    x = np.linspace(-2.0, 3.0, 25)
    y = 1.0 - 0.7 * x + 0.4 * x ** 2 + rng.normal(0, 0.3, x.size)
    w = rng.uniform(0.5, 2.0, x.size) if weighted else None
    sol = solve(Quadratic(), x, y, [0.0, 0.0, 0.0], weights=w)
    inf = infer(sol)
    design = np.column_stack([np.ones_like(x), x, x ** 2])
    ref = (sm.WLS(y, design, weights=w) if weighted else sm.OLS(y, design)).fit()
    est = np.array([r.estimate for r in inf.parameters])
    np.testing.assert_allclose(est, ref.params, rtol=1e-8)
    np.testing.assert_allclose([r.std_error for r in inf.parameters], ref.bse, rtol=1e-8)
    np.testing.assert_allclose([r.statistic for r in inf.parameters], ref.tvalues, rtol=1e-8)
    np.testing.assert_allclose([r.p_value for r in inf.parameters], ref.pvalues, rtol=1e-6)
    limits = np.array([[r.lower, r.upper] for r in inf.parameters])
    np.testing.assert_allclose(limits, ref.conf_int(0.05), rtol=1e-8)
    assert inf.rss == pytest.approx(ref.ssr, rel=1e-10)
    assert inf.sigma == pytest.approx(np.sqrt(ref.scale), rel=1e-10)
    assert inf.df_residual == ref.df_resid
    # statsmodels: llf at the ML variance incl. 0.5 sum(log w) for WLS; aic/bic with k = 3
    assert inf.log_likelihood == pytest.approx(ref.llf, rel=1e-10)
    assert inf.aic == pytest.approx(ref.aic, rel=1e-10)
    assert inf.bic == pytest.approx(ref.bic, rel=1e-10)
    assert inf.r_squared == pytest.approx(ref.rsquared, rel=1e-10)
    # leverages of sqrt(W) X: statsmodels' OLS influence on the whitened problem
    sw = np.sqrt(w) if weighted else np.ones_like(x)
    whitened = sm.OLS(sw * y, sw[:, None] * design).fit()
    np.testing.assert_allclose(inf.leverage, whitened.get_influence().hat_matrix_diag,
                               rtol=1e-8)


@pytest.mark.parametrize("start", [[5.0, 1.0], [5.0, 1.5]])  # inside, and on the bound
def test_active_upper_bound_matches_trust_region_reflective(start):
    x, y = _michaelis_menten(3)
    model = MichaelisMenten()
    upper = [np.inf, 1.5]  # below the unconstrained estimate of km (about 2)
    sol = solve(model, x, y, start, upper=upper)
    ref = least_squares(lambda t: model.values(x, t) - y, [5.0, 1.0],
                        jac=lambda t: model.jacobian(x, t), bounds=([-np.inf, -np.inf], upper),
                        method="trf", ftol=1e-15, xtol=1e-15, gtol=1e-15)
    assert sol.converged
    assert sol.bound_status == ("free", "upper")
    assert sol.estimates[1] == 1.5
    assert sol.estimates[0] == pytest.approx(ref.x[0], rel=1e-8)
    assert any(n.code == "parameter_at_bound" for n in sol.notices)


def test_solution_fields_are_consistent_and_frozen():
    x, y, _ = logistic_data(4)
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # no Python warning may escape the engine
        sol = solve(Logistic4(), x, y, [0.0, 1.0, 3.0, 1.5])
    np.testing.assert_allclose(sol.fitted + sol.residuals, y, rtol=0, atol=1e-14)
    assert sol.rss == pytest.approx(float(sol.residuals @ sol.residuals), rel=1e-14)
    np.testing.assert_allclose(sol.jacobian, Logistic4().jacobian(x, sol.estimates))
    assert sol.relative_offset <= 1e-8 and sol.rank == 4 and sol.njev <= sol.nfev
    assert sol.iterations == sol.njev and len(sol.attempts) == 1
    with pytest.raises(ValueError):
        sol.estimates[0] = 1.0
    with pytest.raises(AttributeError):
        sol.rss = 0.0  # type: ignore[misc]
