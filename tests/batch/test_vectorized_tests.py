"""Vectorized residual tests and influence rules against scipy and statsmodels.

Oracles: scipy.stats.shapiro (Royston's AS R94), statsmodels durbin_watson,
het_breuschpagan(robust=True) (Koenker's studentized form) and OLSInfluence
(leverage, Cook's distance). Thresholds are common practice: Cook's distance
above the median of F(p, n - p), leverage above 2p/n.
"""

from __future__ import annotations

import numpy as np
import statsmodels.api as sm
from scipy import stats
from statsmodels.stats.diagnostic import het_breuschpagan
from statsmodels.stats.outliers_influence import OLSInfluence
from statsmodels.stats.stattools import durbin_watson

from service.core import ModelSpec
from service.core import batch_tests as bt
from service.core.batch import fit_batch
from tests.batch.conftest import ragged_series, rel


def test_shapiro_wilk_rows_equal_scipy_for_every_length_3_to_120():
    rng = np.random.default_rng(17)
    lengths = np.arange(3, 121)
    e = np.zeros((lengths.size, lengths.max()))
    for i, n in enumerate(lengths):
        e[i, :n] = rng.standard_t(5, n) if i % 2 else rng.normal(size=n)
    w, p = bt.shapiro_wilk(e, lengths.astype(float), padded=True)
    for i, n in enumerate(lengths):
        ref = stats.shapiro(e[i, :n])
        assert abs(w[i] - ref.statistic) < 1e-12, n
        assert rel(p[i], ref.pvalue) < 1e-9, n


def test_durbin_watson_rows_equal_statsmodels_with_padding():
    rng = np.random.default_rng(2)
    lengths = rng.integers(5, 60, 40)
    e = np.zeros((40, 60))
    for i, n in enumerate(lengths):
        e[i, :n] = np.cumsum(rng.normal(size=n)) * 0.3 + rng.normal(size=n)
    dw = bt.durbin_watson(e, lengths.astype(float), padded=True)
    assert rel(dw, [durbin_watson(e[i, :n]) for i, n in enumerate(lengths)]) < 1e-12


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
        outl = ols.outlier_test(method="bonferroni", alpha=0.05)
        assert result.outliers.get(g, ()) == tuple(np.flatnonzero(outl[:, 2] < 0.05))
    assert checked_bp > 0  # the heteroscedastic series did trigger the test
