"""Per-point residual forms, influence measures and formal assumption tests.

All residual forms use the weighted residuals ``e_i = sqrt(w_i) (y_i - ŷ_i)``
(for unweighted fits, the plain residuals), so they share one variance.

Thresholds (common practice, also returned in ``Diagnostics.thresholds``):

* outlier: |externally studentized residual| above the two-sided
  Bonferroni t critical value ``t_{df-1}(1 - alpha/(2n))``, alpha = 0.05;
* high leverage: ``h > 2p/n`` (Hoaglin & Welsch);
* influential: Cook's distance above the median of ``F(p, n - p)``
  (Cook & Weisberg); ``|DFFITS| > 2 sqrt(p/n)`` (Belsley, Kuh & Welsch) is
  reported as a threshold for reference.
"""

from __future__ import annotations

import warnings

import numpy as np
from scipy import special, stats

from service.core.anova import lack_of_fit
from service.core.results import Diagnostics, TestResult, frozen_array

NAN = float("nan")
OUTLIER_ALPHA = 0.05
TEST_ALPHA = 0.05
SHAPIRO_MAX_N = 5000  # scipy's p-value is only approximate above this size


def diagnose(index: np.ndarray, x: np.ndarray, t: np.ndarray, q: np.ndarray,
             effects: np.ndarray, zw: np.ndarray, sqrt_w: np.ndarray | None, rss: float,
             degree: int, exact: bool) -> Diagnostics:
    """Compute the diagnostics of the chosen fit.

    Parameters
    ----------
    index : original positions of the used points.
    x : original x of the used points (lack-of-fit levels).
    t : scaled x (for the Breusch-Pagan auxiliary regression).
    q : (n, p) thin Q of the chosen fit's weighted design.
    effects : (p,) leading effects ``Q'(sqrt(w) y)``.
    zw : weighted response on the fitting scale.
    rss : residual SS (0.0 for an exact fit).
    """
    n, p = q.shape
    df = n - p
    fitted_w = q @ np.asarray(effects, dtype=float)
    e = zw - fitted_w
    raw = e if sqrt_w is None else e / sqrt_w
    h = np.einsum("ij,ij->i", q, q)
    with np.errstate(all="ignore"):
        sigma = np.sqrt(rss / df) if df > 0 else NAN
        one_h = 1 - h
        std = e / (sigma * np.sqrt(one_h))
        s_i2 = (rss - e * e / one_h) / (df - 1) if df > 1 else np.full(n, NAN)
        stud = e / np.sqrt(s_i2 * one_h)
        cook = std * std * h / (p * one_h)
        dffits = stud * np.sqrt(h / one_h)
        bonf = float(special.stdtrit(df - 1, 1 - OUTLIER_ALPHA / (2 * n))) if df > 1 else NAN
        lev_cut = 2 * p / n
        cook_cut = float(special.fdtri(p, df, 0.5)) if df > 0 else NAN
    if exact or df < 1:
        std = stud = cook = dffits = np.full(n, NAN)
    tests = _tests(e, t, degree, exact, df)
    lof = lack_of_fit(x, zw, sqrt_w, rss, p)
    outliers = tuple(int(index[i]) for i in np.flatnonzero(np.abs(stud) > bonf))
    high = tuple(int(index[i]) for i in np.flatnonzero(h > lev_cut)) if n > p else ()
    infl = tuple(int(index[i]) for i in np.flatnonzero(cook > cook_cut))
    thresholds = {"outlier_alpha": OUTLIER_ALPHA, "outlier_t": bonf, "leverage": lev_cut,
                  "cooks_distance": cook_cut,
                  "dffits": float(2 * np.sqrt(p / n)), "test_alpha": TEST_ALPHA}
    return Diagnostics(frozen_array(index, dtype=int), frozen_array(raw), frozen_array(std),
                       frozen_array(stud), frozen_array(h), frozen_array(cook),
                       frozen_array(dffits), tests, lof, outliers, high, infl, thresholds)


def _tests(e: np.ndarray, t: np.ndarray, degree: int, exact: bool, df: int
           ) -> tuple[TestResult, ...]:
    if exact or df < 1:
        why = "exact fit: residuals are rounding noise" if exact else "no residual df"
        return tuple(TestResult(name, NAN, NAN, None, f"not computed ({why})")
                     for name in ("shapiro_wilk", "breusch_pagan", "durbin_watson"))
    return (_shapiro(e), _breusch_pagan(e, t, degree), _durbin_watson(e))


def _shapiro(e: np.ndarray) -> TestResult:
    n = e.size
    if n < 3:
        return TestResult("shapiro_wilk", NAN, NAN, None, "needs at least 3 points")
    with warnings.catch_warnings(), np.errstate(all="ignore"):
        warnings.simplefilter("ignore")
        res = stats.shapiro(e)
    note = "normality of the weighted residuals"
    if n > SHAPIRO_MAX_N:
        note += f"; p-value approximate for n > {SHAPIRO_MAX_N}"
    return TestResult("shapiro_wilk", float(res.statistic), float(res.pvalue), None, note)


def _breusch_pagan(e: np.ndarray, t: np.ndarray, degree: int) -> TestResult:
    """Koenker's studentized form: LM = n R² of e² on (1, t, ..., t^d), chi² on d df."""
    n = e.size
    if degree < 1 or n <= degree + 1:
        return TestResult("breusch_pagan", NAN, NAN, None,
                          "needs at least one power of x and more points than coefficients")
    z = e * e
    zc = z - z.mean()
    aux = np.vander(t, degree + 1, increasing=True)
    qa = np.linalg.qr(aux)[0]
    proj = qa.T @ zc
    with np.errstate(all="ignore"):
        r2 = float(proj @ proj) / float(zc @ zc)
        lm = n * r2
        pv = float(special.chdtrc(degree, lm))
    return TestResult("breusch_pagan", lm, pv, (float(degree),),
                      "Koenker's studentized LM test of constant variance against the powers of x")


def _durbin_watson(e: np.ndarray) -> TestResult:
    d = np.diff(e)
    with np.errstate(all="ignore"):
        dw = float(d @ d) / float(e @ e)
    return TestResult("durbin_watson", dw, NAN, None,
                      "serial correlation in the given order: ~2 none, <2 positive, >2 negative")
