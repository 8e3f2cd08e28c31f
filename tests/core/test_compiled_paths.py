"""The compiled (numba) paths of fit_series against statsmodels / numpy as oracles.

The existing oracle tests cover the unweighted short fit; these cover the
branches the compiled kernels take besides it: weighted and no-intercept
per-point diagnostics and Breusch-Pagan (fresh basis of the unweighted
powers), long series (Gram passes, n above ``qr.EXTENDED_MAX_ROWS``),
condition numbers (one-sided Jacobi), and the one-pass x summary (distinct
values, unsorted x).
"""

from __future__ import annotations

import numpy as np
import pytest
import statsmodels.api as sm
from statsmodels.stats.diagnostic import het_breuschpagan
from statsmodels.stats.outliers_influence import OLSInfluence
from statsmodels.stats.stattools import durbin_watson

from service.core import FitOptions, ModelSpec, fit_series

RTOL = 1e-9  # issue 2: oracle agreement
NO_GRID = FitOptions(grid=None)


def _series(seed, n, weighted):
    rng = np.random.default_rng(seed)
    x = np.sort(rng.uniform(0.5, 9.5, n))
    y = 1.5 + 0.7 * x - 0.06 * x**2 + rng.normal(0, 0.3 + 0.05 * x, n)
    w = rng.uniform(0.3, 4.0, n) if weighted else None
    return x, y, w


def _whitened_fit(x, y, w, degree, intercept):
    first = 0 if intercept else 1
    exog = np.vander(x, degree + 1, increasing=True)[:, first:]
    sw = np.ones_like(x) if w is None else np.sqrt(w)
    # oracle: statsmodels OLS on the whitened problem (same numbers as WLS; influence needs OLS)
    return sm.OLS(y * sw, exog * sw[:, None]).fit()


@pytest.mark.parametrize("n", [80, 6000])
@pytest.mark.parametrize(("weighted", "intercept"), [(True, True), (False, False), (True, False)])
def test_per_point_diagnostics_and_tests_match_statsmodels(n, weighted, intercept):
    x, y, w = _series(70 + n, n, weighted)
    degree = 2
    res = _whitened_fit(x, y, w, degree, intercept)
    infl = OLSInfluence(res)
    d = fit_series(x, y, w, model=ModelSpec(degree=degree, intercept=intercept),
                   options=NO_GRID).diagnostics
    sw = np.ones_like(x) if w is None else np.sqrt(w)
    # oracle: statsmodels OLSInfluence (weighted residuals e_i = sqrt(w_i) (y_i - fit_i));
    # near-zero entries are compared at 1e-12 of the array's largest magnitude
    internal = infl.resid_studentized_internal
    if n <= 1000:
        external = infl.resid_studentized_external  # statsmodels: leave-one-out loop, O(n²)
    else:  # from statsmodels' internal ones by the identity t = r sqrt((df-1)/(df-r²))
        df = res.df_resid  # (Belsley, Kuh & Welsch 1980, common practice)
        external = internal * np.sqrt((df - 1) / (df - internal**2))
    h = infl.hat_matrix_diag
    pairs = [(d.residuals * sw, res.resid), (d.leverage, h), (d.standardized, internal),
             (d.studentized, external), (d.cooks_distance, infl.cooks_distance[0]),
             (d.dffits, external * np.sqrt(h / (1 - h)))]
    for ours, oracle in pairs:
        np.testing.assert_allclose(ours, oracle, rtol=RTOL, atol=1e-12 * np.abs(oracle).max())
    if n <= 1000:  # oracle: statsmodels DFFITS
        np.testing.assert_allclose(d.dffits, infl.dffits[0], rtol=RTOL,
                                   atol=1e-12 * np.abs(infl.dffits[0]).max())
    tests = {t.name: t for t in d.tests}
    # oracle: statsmodels het_breuschpagan (Koenker's LM) of e² on the unweighted (1, x, x²)
    lm, lm_p, _, _ = het_breuschpagan(res.resid, np.vander(x, degree + 1, increasing=True))
    np.testing.assert_allclose(tests["breusch_pagan"].statistic, lm, rtol=RTOL)
    np.testing.assert_allclose(tests["breusch_pagan"].p_value, lm_p, rtol=1e-8)
    # oracle: statsmodels durbin_watson of the weighted residuals in the given order
    np.testing.assert_allclose(tests["durbin_watson"].statistic, durbin_watson(res.resid),
                               rtol=RTOL)


@pytest.mark.parametrize("n", [40, 6000])
@pytest.mark.parametrize("weighted", [False, True])
def test_condition_number_matches_numpy(n, weighted):
    x, y, w = _series(90 + n, n, weighted)
    degree = 4
    rep = fit_series(x, y, w, model=ModelSpec(degree=degree), options=NO_GRID)
    t = (x - rep.model.x_shift) / rep.model.x_scale
    sw = np.ones_like(x) if w is None else np.sqrt(w)
    # oracle: numpy's 2-norm condition number of the weighted scaled-basis design
    expected = np.linalg.cond(np.vander(t, degree + 1, increasing=True) * sw[:, None])
    np.testing.assert_allclose(rep.statistics.condition_number, expected, rtol=1e-9)


@pytest.mark.parametrize("shuffle", [False, True])
def test_distinct_x_and_levels_match_numpy_unique(shuffle):
    rng = np.random.default_rng(5)
    x = np.round(rng.uniform(0, 4, 60), 1)  # replicated x values
    y = 2 + x + rng.normal(0, 0.2, x.size)
    x = x if shuffle else np.sort(x)
    lof = fit_series(x, y, model=ModelSpec(degree=1), options=NO_GRID).diagnostics.lack_of_fit
    # oracle: numpy.unique counts the distinct x values (the lack-of-fit levels)
    assert lof.n_levels == np.unique(x).size
    # oracle: statsmodels OLS residual SS minus the pure-error SS about the level means
    res = sm.OLS(y, np.vander(x, 2, increasing=True)).fit()
    means = {v: y[x == v].mean() for v in np.unique(x)}
    pure = float(sum((yi - means[xi]) ** 2 for xi, yi in zip(x, y, strict=True)))
    np.testing.assert_allclose(lof.ss_pure, pure, rtol=RTOL)
    np.testing.assert_allclose(lof.ss_lack, res.ssr - pure, rtol=1e-8)
