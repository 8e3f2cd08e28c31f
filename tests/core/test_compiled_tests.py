"""The compiled formal tests of a fit against scipy: Shapiro-Wilk (scipy.stats.shapiro),
the chi-squared tail of Breusch-Pagan (scipy.special.chdtrc) and the incomplete beta
function behind the Durbin-Watson p-value (scipy.special.betainc)."""

from __future__ import annotations

import numpy as np
import pytest
import scipy.stats
from scipy import special

from service.core import FitOptions, ModelSpec, fit_series
from service.core.checks.kernels import beta_cdf, chi2_tail


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


def test_beta_cdf_equals_scipy_betainc():
    # oracle: scipy.special.betainc (Boost's ibeta); a from 0.5 to 2.5e6 (the Durbin-Watson
    # beta has a, b near n/2), b/a from 0.3 to 10, x across +-12 SD of the distribution:
    # relative error in the lower tail (p < 0.9, down to 1e-290), absolute against the
    # complement 1 - I_(1-x)(b, a) everywhere (scipy's direct value loses digits near x = 1)
    worst_rel = worst_abs = 0.0
    for a in (0.5, 1.0, 2.5, 9.9, 10.0, 37.3, 200.0, 2500.0, 25000.0, 2.5e5, 2.5e6):
        for ratio in (0.3, 1.0, 1.3, 3.0, 10.0):
            b = a * ratio
            mean, sd = a / (a + b), np.sqrt(a * b / ((a + b) ** 2 * (a + b + 1)))
            xs = np.clip(mean + sd * np.linspace(-12.0, 12.0, 49), 1e-300, 1 - 1e-12)
            ref = special.betainc(a, b, xs)
            got = np.array([beta_cdf(a, b, x) for x in xs])
            low = (ref > 1e-290) & (ref < 0.9)
            worst_rel = max(worst_rel, float(np.max(np.abs(got[low] - ref[low]) / ref[low])))
            complement = 1.0 - special.betainc(b, a, 1.0 - xs)
            worst_abs = max(worst_abs, float(np.max(np.abs(got - complement))))
    assert worst_rel < 1e-10, worst_rel
    assert worst_abs < 1e-12, worst_abs
    assert beta_cdf(2.0, 3.0, 0.0) == 0.0 and beta_cdf(2.0, 3.0, 1.0) == 1.0
    assert np.isnan(beta_cdf(2.0, 3.0, np.nan)) and np.isnan(beta_cdf(0.0, 3.0, 0.5))


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
    # n = 3 fits the mean: a 3-point line leaves one residual df, where no residual test is
    # run (tests/core/test_one_residual_df.py)
    model = ModelSpec(degree=0 if n == 3 else 1)
    d = fit_series(x, y, w, model=model, options=FitOptions(grid=None)).diagnostics
    sw = {t.name: t for t in d.tests}["shapiro_wilk"]
    ref = scipy.stats.shapiro(d.residuals * np.sqrt(w))
    np.testing.assert_allclose(sw.statistic, ref.statistic, rtol=1e-12)
    np.testing.assert_allclose(sw.p_value, ref.pvalue, rtol=1e-9)

