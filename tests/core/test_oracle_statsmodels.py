"""Seeded data against statsmodels / scipy as oracles (agreement to 1e-9 relative)."""

from __future__ import annotations

import numpy as np
import pytest
import statsmodels.api as sm

from service.core import FitOptions, GridSpec, ModelSpec, fit_series, predict

RTOL = 1e-9  # issue 2: oracle agreement


def _data(seed, n=60, weighted=False):
    rng = np.random.default_rng(seed)
    x = np.sort(rng.uniform(-3, 7, n))
    y = 2 - 0.5 * x + 0.3 * x**2 + rng.normal(0, 1.0, n)
    w = rng.uniform(0.5, 3.0, n) if weighted else None
    return x, y, w


def _exog(x, degree):
    return np.vander(x, degree + 1, increasing=True)


@pytest.mark.parametrize("weighted", [False, True])
@pytest.mark.parametrize("degree", [1, 2, 4])
def test_coefficients_and_statistics_match_statsmodels(degree, weighted):
    x, y, w = _data(10 + degree, weighted=weighted)
    # oracle: statsmodels OLS / WLS (weights = inverse variances, statsmodels' convention too)
    res = (sm.WLS(y, _exog(x, degree), weights=w) if weighted else
           sm.OLS(y, _exog(x, degree))).fit()
    rep = fit_series(x, y, w, model=ModelSpec(degree=degree))
    np.testing.assert_allclose([c.estimate for c in rep.coefficients], res.params, rtol=RTOL)
    np.testing.assert_allclose([c.std_error for c in rep.coefficients], res.bse, rtol=RTOL)
    np.testing.assert_allclose([c.t for c in rep.coefficients], res.tvalues, rtol=RTOL)
    np.testing.assert_allclose([c.p_value for c in rep.coefficients], res.pvalues, rtol=1e-8)
    ci = res.conf_int(0.05)
    np.testing.assert_allclose([c.lower for c in rep.coefficients], ci[:, 0], rtol=RTOL)
    np.testing.assert_allclose([c.upper for c in rep.coefficients], ci[:, 1], rtol=RTOL)
    st = rep.statistics
    np.testing.assert_allclose(
        [st.rss, st.r_squared, st.adj_r_squared, st.f, st.log_likelihood, st.aic, st.bic],
        [res.ssr, res.rsquared, res.rsquared_adj, res.fvalue, res.llf, res.aic, res.bic],
        rtol=RTOL)
    np.testing.assert_allclose(st.f_p_value, res.f_pvalue, rtol=1e-8)
    np.testing.assert_allclose(st.sigma, np.sqrt(res.scale), rtol=RTOL)
    np.testing.assert_allclose(rep.model.raw_covariance, res.cov_params(), rtol=1e-8,
                               atol=1e-12 * np.abs(res.cov_params()).max())


@pytest.mark.parametrize("weighted", [False, True])
def test_predict_matches_get_prediction(weighted):
    x, y, w = _data(3, weighted=weighted)
    degree = 2
    res = (sm.WLS(y, _exog(x, degree), weights=w) if weighted else
           sm.OLS(y, _exog(x, degree))).fit()
    gx = np.linspace(-4, 8, 37)
    rep = fit_series(x, y, w, model=ModelSpec(degree=degree),
                     options=FitOptions(grid=GridSpec(x=tuple(gx)), level=0.9))
    # oracle: statsmodels get_prediction summary_frame (mean_ci_*, obs_ci_* at unit weight)
    frame = res.get_prediction(_exog(gx, degree)).summary_frame(alpha=0.1)
    g = rep.grid
    np.testing.assert_allclose(g.fit, frame["mean"], rtol=RTOL)
    np.testing.assert_allclose(g.se_fit, frame["mean_se"], rtol=RTOL)
    np.testing.assert_allclose(g.mean_lower, frame["mean_ci_lower"], rtol=RTOL)
    np.testing.assert_allclose(g.mean_upper, frame["mean_ci_upper"], rtol=RTOL)
    np.testing.assert_allclose(g.obs_lower, frame["obs_ci_lower"], rtol=RTOL)
    np.testing.assert_allclose(g.obs_upper, frame["obs_ci_upper"], rtol=RTOL)
    # the stored model reproduces the grid exactly (same code path)
    again = predict(rep.model, gx)
    assert np.array_equal(again.fit, g.fit) and np.array_equal(again.obs_upper, g.obs_upper)
    assert np.array_equal(g.extrapolated, (gx < x.min()) | (gx > x.max()))
