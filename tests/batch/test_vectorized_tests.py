"""Batch residual tests and influence rules against scipy and statsmodels.

Oracles: scipy.stats.shapiro (Royston's AS R94), statsmodels durbin_watson,
het_breuschpagan(robust=True) (Koenker's studentized form) and OLSInfluence
(leverage, Cook's distance), OLSResults.outlier_test (Bonferroni). Thresholds:
Cook's distance above the median of F(p, n - p), leverage above 2p/n, the outlier
test at the flags' per-test level TEST_ALPHA (0.01).
"""

from __future__ import annotations

import numpy as np
import statsmodels.api as sm
from scipy import stats
from statsmodels.stats.diagnostic import het_breuschpagan
from statsmodels.stats.outliers_influence import OLSInfluence
from statsmodels.stats.stattools import durbin_watson

from service.core import ModelSpec
from service.core.batch import engine
from service.core.batch import residuals as batch_residuals
from service.core.batch.driver import fit_batch
from service.core.checks.flags import TEST_ALPHA
from tests.batch.conftest import ragged_series, rel


def test_shapiro_wilk_of_ragged_rows_equals_scipy_for_every_length_3_to_120():
    # oracle: scipy.stats.shapiro (AS R94) on each row; the rows have different lengths,
    # so the padded gather-and-sort path is the one exercised
    rng = np.random.default_rng(17)
    lengths = np.arange(3, 121)
    parts = [rng.standard_t(5, n) if i % 2 else rng.normal(size=n)
             for i, n in enumerate(lengths)]
    resid = np.concatenate(parts)
    offsets = np.r_[0, np.cumsum(lengths)]
    rows = np.arange(lengths.size)
    spread = np.array([float(((v - v.mean()) ** 2).sum()) for v in parts])
    tabs = engine.tables(lengths, 5)
    w, p = engine._shapiro_w(resid, offsets, rows, lengths.astype(float), spread, tabs)
    for i, v in enumerate(parts):
        ref = stats.shapiro(v)
        assert abs(w[i] - ref.statistic) < 1e-12, lengths[i]
        assert rel(p[i], ref.pvalue) < 1e-9, lengths[i]


def test_shapiro_wilk_of_back_to_back_rows_equals_scipy():
    # oracle: scipy.stats.shapiro; equal lengths stored back to back use a reshaped view
    rng = np.random.default_rng(18)
    parts = [rng.exponential(size=40) for _ in range(25)]
    offsets = np.arange(26) * 40
    spread = np.array([float(((v - v.mean()) ** 2).sum()) for v in parts])
    n = np.full(25, 40.0)
    w, p = engine._shapiro_w(np.concatenate(parts), offsets, np.arange(25), n, spread,
                             engine.tables(np.full(25, 40), 5))
    assert rel(w, [stats.shapiro(v).statistic for v in parts]) < 1e-12
    assert rel(p, [stats.shapiro(v).pvalue for v in parts]) < 1e-9


def test_residual_pass_durbin_watson_equals_statsmodels_for_many_lengths():
    # oracle: statsmodels.stats.stattools.durbin_watson; with p = P = 0 the pass takes
    # the given vector as the residuals
    rng = np.random.default_rng(2)
    for n in rng.integers(5, 60, 40).tolist():
        e = np.cumsum(rng.normal(size=n)) * 0.3 + rng.normal(size=n)
        got = batch_residuals.residual_pass(
            e, np.zeros(1), np.zeros((1, n)), 0, 0, n, (np.inf, np.inf, np.inf),
            np.zeros((1, n)), 0, np.zeros(2), np.zeros(n, dtype=np.uint8), np.empty(n), 0)
        assert rel(got[2], durbin_watson(e)) < 1e-12
        assert rel(got[1], ((e - e.mean()) ** 2).sum()) < 1e-9  # Shapiro-Wilk denominator


def test_batch_diagnostics_equal_statsmodels_series_by_series():
    series = ragged_series(31, 60)
    rng = np.random.default_rng(8)
    for i in range(0, 60, 7):  # make some heteroscedastic, some with a wild point
        x, y, _ = series[i]
        series[i] = (x, y + rng.normal(0.0, 0.05, x.size) * x ** 2, None)
    for i in range(3, 60, 11):
        x, y, _ = series[i]
        y = y.copy()
        y[len(y) // 2] += 8.0
        series[i] = (x, y, None)
    model = ModelSpec(max_degree=3, select="aic")
    result = fit_batch([(x, y) for x, y, _ in series], model=model)
    checked_bp = 0
    for g, (x, y, _) in enumerate(series):
        d = int(result.columns["degree"][g])
        X = np.vander(x, d + 1, increasing=True)
        ols = sm.OLS(y, X).fit()
        infl = OLSInfluence(ols)
        assert rel(result.columns["durbin_watson"][g], durbin_watson(ols.resid)) < 1e-9
        assert rel(result.columns["shapiro_wilk_p"][g], stats.shapiro(ols.resid).pvalue) < 1e-8
        lm, lm_p, _, _ = het_breuschpagan(ols.resid, X, robust=True)
        assert rel(result.columns["breusch_pagan_p"][g], lm_p) < 1e-8
        checked_bp += lm_p < 0.05
        p, n = d + 1, x.size
        cut = stats.f.ppf(0.5, p, n - p)
        assert result.influential.get(g, ()) == tuple(np.flatnonzero(infl.cooks_distance[0] > cut))
        high = np.flatnonzero(infl.hat_matrix_diag > 2 * p / n)
        assert int(result.columns["n_high_leverage"][g]) == high.size
        outl = ols.outlier_test(method="bonferroni", alpha=TEST_ALPHA)
        assert result.outliers.get(g, ()) == tuple(np.flatnonzero(outl[:, 2] < TEST_ALPHA))
    assert checked_bp > 0  # the heteroscedastic series did trigger the test
