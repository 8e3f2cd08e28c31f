"""The compiled formal tests of a fit against scipy: Shapiro-Wilk (scipy.stats.shapiro)
and the chi-squared tail of Breusch-Pagan (scipy.special.chdtrc)."""

from __future__ import annotations

import numpy as np
import pytest
import scipy.stats
from scipy import special

from service.core import FitOptions, ModelSpec, fit_series
from service.core.checks.kernels import chi2_tail


def test_chi2_tail_equals_scipy_chdtrc():
    # oracle: scipy.special.chdtrc (Cephes); df 1..12 (the degrees a fit can have), x over
    # fourteen decades including far tails (p down to ~1e-300)
    xs = np.concatenate(([0.0], np.logspace(-6, 2.8, 400)))
    worst = 0.0
    for df in range(1, 13):
        ref = special.chdtrc(df, xs)
        got = np.array([chi2_tail(df, x) for x in xs])
        assert np.all(ref[ref > 0] > 0)
        keep = ref > 1e-300
        worst = max(worst, float(np.max(np.abs(got[keep] - ref[keep]) / ref[keep])))
    assert worst < 1e-12, worst


def test_chi2_tail_edges():
    assert chi2_tail(3, 0.0) == 1.0
    assert chi2_tail(3, np.inf) == 0.0
    assert np.isnan(chi2_tail(3, np.nan))


@pytest.mark.parametrize("n", [3, 4, 5, 6, 7, 11, 12, 13, 25, 100, 999, 5000])
def test_shapiro_wilk_of_residuals_equals_scipy(n):
    # oracle: scipy.stats.shapiro (Royston's AS R94) on the weighted residuals the fit reports;
    # sizes cover the n = 3 formula, the small-sample (n < 12) and large-sample p polynomials
    rng = np.random.default_rng(n)
    x = np.sort(rng.uniform(0.0, 5.0, n))
    w = rng.uniform(0.5, 2.0, n)
    y = 1.0 + 0.3 * x + rng.standard_t(4, n)
    d = fit_series(x, y, w, model=ModelSpec(degree=1), options=FitOptions(grid=None)).diagnostics
    sw = {t.name: t for t in d.tests}["shapiro_wilk"]
    ref = scipy.stats.shapiro(d.residuals * np.sqrt(w))
    np.testing.assert_allclose(sw.statistic, ref.statistic, rtol=1e-12)
    np.testing.assert_allclose(sw.p_value, ref.pvalue, rtol=1e-9)

