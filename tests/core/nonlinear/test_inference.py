"""Inference: weight modes, criteria and tests against scipy/statsmodels oracles.

Oracles:
* known-SD mode = statsmodels WLS with a fixed scale of 1
  (``cov_type="fixed scale"``; normal quantiles) for a linear model, and for a
  nonlinear one numpy's ``inv(J'WJ)``, ``scipy.stats.norm`` p-values, the
  Gaussian log-likelihood with known SDs summed by ``scipy.stats.norm.logpdf``,
  and ``scipy.stats.chi2.sf`` for the goodness-of-fit p-value;
* relative mode: curve_fit's pcov (correlations) and statsmodels'
  ``eval_measures.aicc`` (same k as the polynomial family: number of parameters).
"""

from __future__ import annotations

import numpy as np
import pytest
import statsmodels.api as sm
from scipy import stats
from scipy.optimize import curve_fit
from statsmodels.tools.eval_measures import aicc

from service.core.errors import SpecError
from service.core.nonlinear.inference import infer
from service.core.nonlinear.solver import solve
from tests.core.nonlinear.models import Logistic4, MichaelisMenten, Quadratic, logistic_data


def _known_sd_logistic(sd_factor: float):
    """4PL demo data with known, unequal SDs; ``sd_factor`` < 1 understates them."""
    rng = np.random.default_rng(21)
    x = np.repeat(np.geomspace(0.1, 100.0, 8), 3)
    sd = 0.05 + 0.05 * np.arange(x.size) / x.size
    y = Logistic4().values(x, np.array([0.1, 1.2, 5.0, 2.0])) + rng.normal(0.0, sd)
    weights = 1.0 / (sd_factor * sd) ** 2
    return x, y, weights, sol_of(x, y, weights)


def sol_of(x, y, weights):
    return solve(Logistic4(), x, y, [0.0, 1.0, 3.0, 1.5], weights=weights)


def test_known_sd_quadratic_equals_statsmodels_fixed_scale():
    rng = np.random.default_rng(9)
    x = np.linspace(0.0, 4.0, 30)
    sd = 0.2 + 0.1 * x
    y = 0.5 + x - 0.3 * x ** 2 + rng.normal(0.0, sd)
    sol = solve(Quadratic(), x, y, [0.0, 0.0, 0.0], weights=1.0 / sd ** 2)
    inf = infer(sol, weight_mode="known_sd")
    design = np.column_stack([np.ones_like(x), x, x ** 2])
    ref = sm.WLS(y, design, weights=1.0 / sd ** 2).fit(cov_type="fixed scale",
                                                       cov_kwds={"scale": 1.0})
    np.testing.assert_allclose(inf.covariance, ref.cov_params(), rtol=1e-8)
    np.testing.assert_allclose([r.statistic for r in inf.parameters], ref.tvalues, rtol=1e-8)
    np.testing.assert_allclose([r.p_value for r in inf.parameters], ref.pvalues, rtol=1e-6)
    np.testing.assert_allclose([[r.lower, r.upper] for r in inf.parameters],
                               ref.conf_int(0.05), rtol=1e-8)
    assert inf.distribution == "normal" and inf.covariance_scale == 1.0


@pytest.mark.parametrize("sd_factor, rejected", [(1.0, False), (1 / 3, True)])
def test_known_sd_logistic_covariance_likelihood_and_chi_square(sd_factor, rejected):
    x, y, w, sol = _known_sd_logistic(sd_factor)
    inf = infer(sol, weight_mode="known_sd")
    jac = Logistic4().jacobian(x, sol.estimates)
    np.testing.assert_allclose(inf.covariance, np.linalg.inv(jac.T @ (w[:, None] * jac)),
                               rtol=1e-8)
    z = sol.estimates / np.sqrt(np.diag(inf.covariance))
    np.testing.assert_allclose([r.p_value for r in inf.parameters], 2 * stats.norm.sf(abs(z)),
                               rtol=1e-8)
    assert inf.critical_value == pytest.approx(stats.norm.ppf(0.975), rel=1e-12)
    llf = stats.norm.logpdf(y, sol.fitted, 1.0 / np.sqrt(w)).sum()
    assert inf.log_likelihood == pytest.approx(llf, rel=1e-10)
    gof = inf.goodness_of_fit
    assert gof.statistic == pytest.approx(float(w @ sol.residuals ** 2), rel=1e-12)
    assert gof.df == x.size - 4
    assert gof.p_value == pytest.approx(stats.chi2.sf(gof.statistic, gof.df), rel=1e-10)
    assert gof.rejected is rejected and gof.alpha == 0.05
    # relative mode: the same weights only up to a factor, so no chi-square test
    assert infer(sol).goodness_of_fit is None


def test_relative_mode_correlation_and_aicc():
    x, y, _ = logistic_data(2)
    sol = solve(Logistic4(), x, y, [0.0, 1.0, 3.0, 1.5])
    inf = infer(sol, level=0.9)
    _, pcov = curve_fit(lambda xx, *t: Logistic4().values(xx, np.array(t)), x, y,
                        p0=sol.estimates, jac=lambda xx, *t: Logistic4().jacobian(xx, t),
                        ftol=1e-15, xtol=1e-15, gtol=1e-15)
    sd = np.sqrt(np.diag(pcov))
    np.testing.assert_allclose(inf.correlation, pcov / np.outer(sd, sd), rtol=1e-6, atol=1e-9)
    assert inf.aicc == pytest.approx(aicc(inf.log_likelihood, x.size, 4), rel=1e-12)
    t = stats.t.ppf(0.95, x.size - 4)
    row = inf.parameters[2]
    assert (row.lower, row.upper) == pytest.approx((row.estimate - t * row.std_error,
                                                    row.estimate + t * row.std_error), rel=1e-12)
    assert inf.leverage.sum() == pytest.approx(4.0, rel=1e-10)  # trace of a rank-4 hat matrix


def test_no_residual_df_is_reported_not_raised():
    x = np.array([1.0, 4.0])
    sol = solve(MichaelisMenten(), x, np.array([2.0, 4.0]), [5.0, 1.0])
    inf = infer(sol)
    assert inf.df_residual == 0 and np.isnan(inf.sigma)
    assert np.isnan([r.std_error for r in inf.parameters]).all()
    assert any(n.code == "no_residual_df" for n in inf.notices)


@pytest.mark.parametrize("kwargs, field", [({"weight_mode": "absolute"}, "options.weight_mode"),
                                           ({"level": 1.5}, "options.level")])
def test_bad_options(kwargs, field):
    x, y, _ = logistic_data(0)
    sol = solve(Logistic4(), x, y, [0.0, 1.0, 3.0, 1.5])
    with pytest.raises(SpecError) as err:
        infer(sol, **kwargs)
    assert err.value.field == field
