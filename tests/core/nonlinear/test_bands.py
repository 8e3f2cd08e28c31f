"""Delta-method bands against oracles.

Oracles:
* statsmodels ``get_prediction(...).summary_frame`` for a quadratic written as a
  model (OLS, WLS, WLS with a fixed scale of 1 for the known-SD mode); for
  a linear model the delta method is exact. statsmodels takes new observations
  at weight 1 unless told otherwise; ``weights=m`` is the mean of m replicates.
* for the 4PL: curve_fit's pcov with complex-step gradients of the model
  function (independent of the engine's Jacobian and covariance code).
"""

from __future__ import annotations

import numpy as np
import pytest
import statsmodels.api as sm
from scipy import stats
from scipy.optimize import curve_fit

from service.core.errors import DataError
from service.core.nonlinear.bands import predict
from service.core.nonlinear.inference import infer
from service.core.nonlinear.solver import solve
from tests.core.nonlinear.models import ComplexStepModel, Logistic4, Quadratic, logistic_data


def _quadratic(seed=4):
    rng = np.random.default_rng(seed)
    x = np.linspace(-1.0, 2.0, 20)
    sd = 0.1 + 0.1 * np.abs(x)
    return x, 1.0 + 0.5 * x - 0.8 * x ** 2 + rng.normal(0.0, sd), 1.0 / sd ** 2


def _frame(x_new, ref, weights=None):
    design = np.column_stack([np.ones_like(x_new), x_new, x_new ** 2])
    return ref.get_prediction(design, weights=weights).summary_frame(alpha=0.05)


@pytest.mark.parametrize("mode", ["ols", "wls", "wls_known_sd"])
@pytest.mark.parametrize("replicates", [1, 3])
def test_quadratic_bands_equal_statsmodels(mode, replicates):
    x, y, w = _quadratic()
    weights = None if mode == "ols" else w
    sol = solve(Quadratic(), x, y, [0.0, 0.0, 0.0], weights=weights)
    design = np.column_stack([np.ones_like(x), x, x ** 2])
    if mode == "wls_known_sd":
        ref = sm.WLS(y, design, weights=w).fit(cov_type="fixed scale", cov_kwds={"scale": 1.0})
    else:
        ref = sm.WLS(y, design, weights=1.0 if weights is None else w).fit()
    x_new = np.linspace(-1.5, 2.5, 41)
    weight_mode = "known_sd" if mode == "wls_known_sd" else "relative"
    bands = predict(sol, x_new, weight_mode=weight_mode, replicates=replicates)
    frame = _frame(x_new, ref, weights=replicates)
    np.testing.assert_allclose(bands.fit, frame["mean"], rtol=1e-9)
    np.testing.assert_allclose(bands.se_fit, frame["mean_se"], rtol=1e-8)
    for ours, theirs in ((bands.mean_lower, "mean_ci_lower"), (bands.mean_upper, "mean_ci_upper"),
                         (bands.obs_lower, "obs_ci_lower"), (bands.obs_upper, "obs_ci_upper")):
        np.testing.assert_allclose(ours, frame[theirs], rtol=1e-8, atol=1e-12)
    np.testing.assert_array_equal(bands.extrapolated, (x_new < -1.0) | (x_new > 2.0))


def test_logistic_delta_method_with_independent_pieces():
    x, y, _ = logistic_data(1)
    sol = solve(Logistic4(), x, y, [0.0, 1.0, 3.0, 1.5])
    inf = infer(sol)
    _, pcov = curve_fit(lambda xx, *t: Logistic4().values(xx, np.array(t)), x, y,
                        p0=sol.estimates, jac=lambda xx, *t: Logistic4().jacobian(xx, t),
                        ftol=1e-15, xtol=1e-15, gtol=1e-15)
    grid = np.geomspace(0.05, 200.0, 200)
    grad = ComplexStepModel(lambda xx, b: b[3] + (b[0] - b[3]) / (1 + (xx / b[2]) ** b[1]),
                            Logistic4.parameter_names).jacobian(grid, sol.estimates)
    se = np.sqrt(np.einsum("ij,jk,ik->i", grad, pcov, grad))
    bands = predict(sol, grid, inference=inf)
    np.testing.assert_allclose(bands.se_fit, se, rtol=1e-6)
    t = stats.t.ppf(0.975, x.size - 4)
    np.testing.assert_allclose(bands.obs_upper - bands.fit, t * np.sqrt(se ** 2 + inf.sigma ** 2),
                               rtol=1e-6)
    assert bands.extrapolated.sum() == np.sum((grid < 0.1) | (grid > 100.0)) > 0


def test_two_predictor_extrapolation_and_missing_predictions():
    rng = np.random.default_rng(2)
    x = np.column_stack([rng.uniform(1, 5, 30), rng.uniform(10, 20, 30)])
    model = ComplexStepModel(lambda xx, b: b[0] + b[1] * np.log(xx[:, 0]) * xx[:, 1],
                             ("b0", "b1"))
    y = model.values(x, np.array([1.0, 0.2])) + rng.normal(0.0, 0.1, 30)
    sol = solve(model, x, y, [0.0, 0.1])
    x_new = np.array([[2.0, 15.0], [0.5, 15.0], [2.0, 25.0], [-1.0, 15.0]])
    bands = predict(sol, x_new)
    assert bands.extrapolated.tolist() == [False, True, True, True]
    assert np.isfinite(bands.fit[:3]).all() and np.isnan(bands.fit[3])  # log(-1)
    assert np.isnan(bands.mean_lower[3]) and np.isnan(bands.se_fit[3])
    assert [n.code for n in bands.notices] == ["non_finite_prediction"]
    assert "at 1 of the 4 points asked for (x = (-1.0, 15.0))" in bands.notices[0].message
    with pytest.raises(DataError) as err:
        predict(sol, np.array([2.0, 15.0]))
    assert err.value.field == "grid.x"
