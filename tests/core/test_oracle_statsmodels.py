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
    np.testing.assert_allclose(g.se_mean, frame["mean_se"], rtol=RTOL)
    np.testing.assert_allclose(g.mean_lower, frame["mean_ci_lower"], rtol=RTOL)
    np.testing.assert_allclose(g.mean_upper, frame["mean_ci_upper"], rtol=RTOL)
    np.testing.assert_allclose(g.obs_lower, frame["obs_ci_lower"], rtol=RTOL)
    np.testing.assert_allclose(g.obs_upper, frame["obs_ci_upper"], rtol=RTOL)
    # the stored model reproduces the grid exactly (same code path)
    again = predict(rep.model, gx)
    assert np.array_equal(again.fit, g.fit) and np.array_equal(again.obs_upper, g.obs_upper)
    assert np.array_equal(g.extrapolated, (gx < x.min()) | (gx > x.max()))


def test_sequential_anova_matches_anova_lm_typ1():
    import pandas as pd
    import statsmodels.formula.api as smf
    from statsmodels.stats.anova import anova_lm

    x, y, _ = _data(21)
    rep = fit_series(x, y, model=ModelSpec(degree=3))
    frame = pd.DataFrame({"x": x, "y": y})
    # oracle: statsmodels anova_lm(typ=1) on the formula fit, terms in entry order
    table = anova_lm(smf.ols("y ~ x + I(x**2) + I(x**3)", data=frame).fit(), typ=1)
    rows = rep.anova
    assert [r.term for r in rows] == ["x", "x^2", "x^3", "residual"]
    np.testing.assert_allclose([r.sum_of_squares for r in rows], table["sum_sq"], rtol=RTOL)
    np.testing.assert_allclose([r.df for r in rows], table["df"], rtol=0)
    np.testing.assert_allclose([r.mean_square for r in rows], table["mean_sq"], rtol=RTOL)
    np.testing.assert_allclose([r.f for r in rows[:-1]], table["F"][:-1], rtol=RTOL)
    np.testing.assert_allclose([r.p_value for r in rows[:-1]], table["PR(>F)"][:-1], rtol=1e-8)


def test_influence_and_tests_match_statsmodels_and_scipy():
    import scipy.stats
    from statsmodels.stats.diagnostic import het_breuschpagan
    from statsmodels.stats.outliers_influence import OLSInfluence
    from statsmodels.stats.stattools import durbin_watson

    x, y, _ = _data(8, n=80)
    degree = 2
    res = sm.OLS(y, _exog(x, degree)).fit()
    infl = OLSInfluence(res)
    d = fit_series(x, y, model=ModelSpec(degree=degree)).diagnostics
    # oracle: statsmodels OLSInfluence
    np.testing.assert_allclose(d.residuals, res.resid, rtol=RTOL, atol=1e-12)
    np.testing.assert_allclose(d.leverage, infl.hat_matrix_diag, rtol=RTOL)
    np.testing.assert_allclose(d.standardized, infl.resid_studentized_internal, rtol=RTOL)
    np.testing.assert_allclose(d.studentized, infl.resid_studentized_external, rtol=RTOL)
    np.testing.assert_allclose(d.cooks_distance, infl.cooks_distance[0], rtol=RTOL)
    np.testing.assert_allclose(d.dffits, infl.dffits[0], rtol=RTOL)
    tests = {t.name: t for t in d.tests}
    # oracle: statsmodels het_breuschpagan (default robust=True: Koenker's LM), durbin_watson
    lm, lm_p, _, _ = het_breuschpagan(res.resid, res.model.exog)
    np.testing.assert_allclose(tests["breusch_pagan"].statistic, lm, rtol=RTOL)
    np.testing.assert_allclose(tests["breusch_pagan"].p_value, lm_p, rtol=1e-8)
    np.testing.assert_allclose(tests["durbin_watson"].statistic, durbin_watson(res.resid),
                               rtol=RTOL)
    # oracle: scipy.stats.shapiro (our direct call of the same routine must agree)
    sw = scipy.stats.shapiro(res.resid)
    np.testing.assert_allclose(tests["shapiro_wilk"].statistic, sw.statistic, rtol=RTOL)
    np.testing.assert_allclose(tests["shapiro_wilk"].p_value, sw.pvalue, rtol=1e-8)


@pytest.mark.parametrize("weighted", [False, True])
def test_candidate_table_matches_statsmodels(weighted):
    from statsmodels.stats.outliers_influence import OLSInfluence
    from statsmodels.tools.eval_measures import aicc

    x, y, w = _data(5, n=50, weighted=weighted)
    rep = fit_series(x, y, w, model=ModelSpec(max_degree=4, min_degree=1, select="aic"))
    sw = np.ones_like(x) if w is None else np.sqrt(w)
    for cand in rep.selection.candidates:
        exog = _exog(x, cand.degree)
        res = sm.WLS(y, exog, weights=1.0 if w is None else w).fit()
        # PRESS oracle: OLSInfluence.resid_press on the whitened (sqrt(w)-scaled) problem
        press = OLSInfluence(sm.OLS(y * sw, exog * sw[:, None]).fit()).resid_press
        np.testing.assert_allclose(
            [cand.rss, cand.r_squared, cand.adj_r_squared, cand.aic, cand.bic, cand.press,
             cand.aicc, cand.sigma],
            [res.ssr, res.rsquared, res.rsquared_adj, res.aic, res.bic, np.sum(press ** 2),
             aicc(res.llf, res.nobs, cand.degree + 1), np.sqrt(res.scale)], rtol=RTOL)
        assert cand.df_residual == res.df_resid
        if cand.degree > 1:  # F of the last power = squared t of its coefficient (oracle)
            np.testing.assert_allclose(cand.f_last, res.tvalues[-1] ** 2, rtol=RTOL)
            np.testing.assert_allclose(cand.p_last, res.pvalues[-1], rtol=1e-8)
    best = min(rep.selection.candidates, key=lambda c: c.aic)
    assert rep.selection.chosen_degree == best.degree


def test_no_intercept_uses_uncentred_sums_like_statsmodels():
    x, y, _ = _data(30)
    rep = fit_series(x, y, model=ModelSpec(degree=2, intercept=False))
    # oracle: statsmodels OLS without a constant reports the uncentred R²
    res = sm.OLS(y, np.column_stack([x, x * x])).fit()
    assert not rep.statistics.centred
    np.testing.assert_allclose([c.estimate for c in rep.coefficients], res.params, rtol=RTOL)
    np.testing.assert_allclose([c.std_error for c in rep.coefficients], res.bse, rtol=RTOL)
    np.testing.assert_allclose([rep.statistics.r_squared, rep.statistics.adj_r_squared,
                                rep.statistics.f], [res.rsquared, res.rsquared_adj, res.fvalue],
                               rtol=RTOL)
    assert [r.term for r in rep.anova] == ["x", "x^2", "residual"]
    np.testing.assert_allclose(sum(r.sum_of_squares for r in rep.anova[:-1]), res.ess, rtol=RTOL)


def test_log_y_transform_back_transforms_statsmodels_prediction():
    rng = np.random.default_rng(44)
    x = np.linspace(1, 10, 40)
    y = np.exp(0.3 + 0.2 * x + rng.normal(0, 0.1, x.size))
    gx = np.array([1.5, 5.0, 12.0])
    rep = fit_series(x, y, model=ModelSpec(degree=1, transform_y="log"),
                     options=FitOptions(grid=GridSpec(x=tuple(gx))))
    # oracle: statsmodels OLS on log(y), prediction exponentiated (naive back-transform)
    frame = sm.OLS(np.log(y), _exog(x, 1)).fit().get_prediction(_exog(gx, 1)).summary_frame(0.05)
    np.testing.assert_allclose(rep.grid.fit, np.exp(frame["mean"]), rtol=RTOL)
    np.testing.assert_allclose(rep.grid.obs_lower, np.exp(frame["obs_ci_lower"]), rtol=RTOL)
    np.testing.assert_allclose(rep.grid.mean_upper, np.exp(frame["mean_ci_upper"]), rtol=RTOL)
    assert "retransformation_bias" in {n.code for n in rep.warnings}
    assert rep.grid.extrapolated.tolist() == [False, False, True]


def test_reciprocal_x_transform_matches_statsmodels():
    x, y, _ = _data(12)
    x = x + 5.0  # keep x away from 0
    rep = fit_series(x, y, model=ModelSpec(degree=2, transform_x="reciprocal"))
    res = sm.OLS(y, _exog(1 / x, 2)).fit()  # oracle: statsmodels on 1/x
    np.testing.assert_allclose([c.estimate for c in rep.coefficients], res.params, rtol=RTOL)
    np.testing.assert_allclose(rep.statistics.rss, res.ssr, rtol=RTOL)


@pytest.mark.parametrize("weighted", [False, True])
def test_long_series_float64_path_matches_statsmodels(weighted):
    # n above qr.EXTENDED_MAX_ROWS: the float64 CholeskyQR2 path
    from service.core.polynomial import qr

    rng = np.random.default_rng(61)
    n = qr.EXTENDED_MAX_ROWS + 1000
    x = rng.uniform(-2, 30, n)
    y = 3 + 0.1 * x - 0.02 * x**2 + rng.normal(size=n)
    w = rng.uniform(0.2, 5, n) if weighted else None
    exog = _exog(x, 3)
    res = (sm.WLS(y, exog, weights=w) if weighted else sm.OLS(y, exog)).fit()  # oracle
    rep = fit_series(x, y, w, model=ModelSpec(degree=3), options=FitOptions(grid=None))
    np.testing.assert_allclose([c.estimate for c in rep.coefficients], res.params, rtol=1e-9)
    np.testing.assert_allclose([c.std_error for c in rep.coefficients], res.bse, rtol=1e-9)
    np.testing.assert_allclose(rep.statistics.rss, res.ssr, rtol=1e-9)
    sw = np.ones(n) if w is None else np.sqrt(w)  # leverage oracle on the whitened problem
    hat = sm.OLS(y * sw, exog * sw[:, None]).fit().get_influence().hat_matrix_diag
    np.testing.assert_allclose(rep.diagnostics.leverage, hat, rtol=1e-9)
