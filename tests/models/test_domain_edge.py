"""A calibration interval whose lower limit would fall below x = 0 on a curve defined for
x >= 0 only is cut at 0 with status ``interval_at_domain_edge`` (never ``null``/unbounded).

Oracles: the observation band written out by hand (fit +- t_{0.975, df} sqrt(se_mean^2 +
sigma^2), scipy's t quantile; common practice) must contain the reading at x = 0, so no
x >= 0 is excluded below the estimate; for a straight line in sqrt(x) the classical
(Fieller-type) interval in u = sqrt(x) computed by hand with statsmodels OLS has a lower
limit below u = 0. The batched nonlinear path must equal the per-reading search exactly.
Data: seeded invented dose-response series (demo designs).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import statsmodels.api as sm
from scipy import stats

from service.core import ModelSpec, fit_series
from service.core.models.curve_inverse import invert_curve
from service.core.models.curve_reader import CurveReader
from service.core.models.inverse import invert
from service.core.nonlinear.analysis import predict


def _logistic(x, left, right, slope, mid):
    return right + (left - right) / (1 + (x / mid) ** slope)


@pytest.fixture(scope="module", params=["blank", "no_blank"])
def log_dose(request):
    rng = np.random.default_rng(3)
    doses = np.repeat(np.geomspace(1e-2, 1e2, 9), 3)
    x = np.concatenate([np.zeros(3), doses]) if request.param == "blank" else doses
    y = _logistic(x, 0.2, 3.0, 1.5, 0.5) + rng.normal(0, 0.03, x.size)
    return fit_series(x, y, model=ModelSpec(family="logistic4", scale="log")).model


def test_lower_limit_near_the_blank_is_cut_at_zero(log_dose):
    readings = np.array([0.25, 0.26, 0.4])
    estimates = invert_curve(log_dose, readings).estimates
    near = estimates[0]
    assert near.status == "interval_at_domain_edge"
    assert near.lower == 0.0 and near.lower < near.x < near.upper
    assert math.isfinite(near.upper)
    # hand check: the band at x = 0 holds the reading (no x >= 0 below the estimate is
    # excluded), and the band at the upper limit just reaches it
    at = predict(log_dose, [0.0, near.upper])
    sigma, df = log_dose.sigma, log_dose.df_residual
    half = stats.t.ppf(0.975, df) * np.sqrt(np.asarray(at.se_mean) ** 2 + sigma**2)
    fit = np.asarray(at.fit)
    assert fit[0] - half[0] <= near.y <= fit[0] + half[0]
    assert fit[1] - half[1] == pytest.approx(near.y, rel=1e-8)
    far = estimates[2]  # well above the blank: an ordinary two-sided interval
    assert far.status in ("ok", "interval_exceeds_range") and far.lower > 0


def test_batched_and_single_paths_agree_at_the_edge(log_dose):
    y = np.array([0.22, 0.25, 0.27, 0.3, 0.5, 1.5, 0.25])
    m = np.array([1, 1, 2, 1, 3, 1, 4])
    batched = invert_curve(log_dose, y, replicates=m).estimates
    reader = CurveReader(log_dose, log_dose.level)
    statuses = set()
    for got, y0, k in zip(batched, y, m, strict=True):
        want = reader.read(float(y0), int(k))
        assert got.status == want.status
        np.testing.assert_allclose([got.x, got.lower, got.upper],
                                   [want.x, want.lower, want.upper], rtol=1e-10)
        statuses.add(got.status)
    assert "interval_at_domain_edge" in statuses


def test_a_linear_x_curve_keeps_negative_limits():
    # a linear-x logistic is defined below 0: its limits are not cut
    rng = np.random.default_rng(5)
    x = np.repeat(np.linspace(0, 10, 11), 2)
    y = 4.0 / (1 + np.exp(-1.1 * (x - 5.0))) + rng.normal(0, 0.05, x.size)
    fitted = fit_series(x, y, model=ModelSpec(family="logistic4", scale="linear")).model
    assert not CurveReader(fitted, fitted.level).nonnegative
    statuses = {e.status for e in invert_curve(fitted, [0.05, 0.1, 0.2]).estimates}
    assert "interval_at_domain_edge" not in statuses


def test_sqrt_x_polynomial_cuts_the_lower_limit_at_zero():
    rng = np.random.default_rng(3)
    x = np.repeat([0.01, 0.1, 0.5, 1.0, 2.0, 5.0, 10.0], 3)
    y = 0.1 + 0.3 * np.sqrt(x) + rng.normal(0, 0.03, x.size)
    fitted = fit_series(x, y, model=ModelSpec(degree=1, transform_x="sqrt")).model
    y0 = 0.15
    (row,) = invert(fitted, [y0]).estimates
    # hand computation in u = sqrt(x): classical interval of a straight line (Draper & Smith
    # sec. 3.2, from memory) from statsmodels OLS; its lower end lies below u = 0
    u = np.sqrt(x)
    ols = sm.OLS(y, sm.add_constant(u)).fit()
    (b0, b1), cov, s2 = ols.params, ols.cov_params(), ols.scale
    q2 = stats.t.ppf(0.975, ols.df_resid) ** 2
    roots = np.sort(np.roots([b1**2 - q2 * cov[1, 1], 2 * b1 * (b0 - y0) - 2 * q2 * cov[0, 1],
                              (b0 - y0) ** 2 - q2 * (s2 + cov[0, 0])]).real)
    assert roots[0] < 0 < roots[1]
    assert row.status == "interval_at_domain_edge" and row.lower == 0.0
    assert row.upper == pytest.approx(roots[1] ** 2, rel=1e-9)


def test_both_families_cut_the_lower_limit_even_without_an_upper_one():
    # a reading of negligible weight (variance sigma^2 / 1e-300): the band holds it
    # everywhere, so no upper limit exists (interval_unbounded), yet x >= 0 still holds
    rng = np.random.default_rng(3)
    x = np.repeat([0.01, 0.1, 0.5, 1.0, 2.0, 5.0, 10.0], 3)
    y = 1 + 0.3 * np.log(x) + rng.normal(0, 0.03, x.size)
    line = fit_series(x, y, model=ModelSpec(degree=1, transform_x="log")).model
    (row,) = invert(line, [0.5], weights=[1e-300]).estimates
    assert row.status == "interval_unbounded" and row.lower == 0.0 and math.isnan(row.upper)
