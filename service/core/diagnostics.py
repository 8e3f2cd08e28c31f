"""Per-point residual forms, influence measures and formal assumption tests.

All residual forms use the weighted residuals ``e_i = sqrt(w_i) (y_i - ŷ_i)``
(for unweighted fits, the plain residuals), so they share one variance.

Thresholds (common practice, also returned in ``Diagnostics.thresholds``):

* outlier: |externally studentized residual| above the two-sided
  Bonferroni t critical value ``t_{df-1}(1 - alpha/(2n))``, alpha = 0.05;
* high leverage: ``h > 2p/n`` (Hoaglin & Welsch);
* influential: Cook's distance above the median of ``F(p, n - p)``
  (Cook & Weisberg); ``|DFFITS| > 2 sqrt(p/n)`` (Belsley, Kuh & Welsch) is
  reported as a threshold for reference;
* the cut-offs the trust flags use (test alpha, Durbin-Watson range,
  points per coefficient, condition number) are added from
  :data:`service.core.flags.THRESHOLDS`.
"""

from __future__ import annotations

import numpy as np
from scipy import special

from service.core import flags
from service.core.anova import lack_of_fit
from service.core.decomposition import Decomposition
from service.core.normality import shapiro_wilk
from service.core.qr import dot
from service.core.results import Diagnostics, TestResult, frozen_array
from service.core.summary import f_quantile, t_quantile

NAN = float("nan")
OUTLIER_ALPHA = 0.05


def diagnose(index: np.ndarray, x: np.ndarray, dec: Decomposition, degree: int,
             h: np.ndarray, e: np.ndarray, one_h: np.ndarray, rss: float, exact: bool,
             distinct: int) -> Diagnostics:
    """Compute the diagnostics of the chosen fit.

    Parameters
    ----------
    index : original positions of the used points.
    x : original x of the used points (lack-of-fit levels).
    dec : the decomposition the fit came from.
    h, e, one_h : hat diagonal, weighted residuals and ``1 - h`` of the chosen degree.
    rss : residual SS (0.0 for an exact fit).
    distinct : number of distinct x values.
    """
    n, p = x.size, dec.p(degree)
    df = n - p
    raw = e if dec.sqrt_w is None else e / dec.sqrt_w
    ee = e * e
    # runs inside fit_series' errstate (floating-point exceptions ignored)
    sigma = np.sqrt(rss / df) if df > 0 else NAN
    # in place where possible (a long series page-faults on every fresh array); the
    # operations are those of std = e / (sigma sqrt(1-h)),
    # s_i2 = (rss - e²/(1-h)) / (df-1), stud = e / sqrt(s_i2 (1-h)),
    # cook = std² h / (p (1-h)), dffits = stud sqrt(h / (1-h))
    std = np.sqrt(one_h)
    std *= sigma
    np.divide(e, std, out=std)
    if df > 1:
        s_i2 = np.divide(ee, one_h)
        np.subtract(rss, s_i2, out=s_i2)
        s_i2 /= df - 1
    else:
        s_i2 = np.full(n, NAN)
    stud = s_i2
    stud *= one_h
    np.sqrt(stud, out=stud)
    np.divide(e, stud, out=stud)
    cook = np.multiply(std, std)
    cook *= h
    dffits = np.multiply(p, one_h)  # scratch: p (1 - h)
    cook /= dffits
    np.divide(h, one_h, out=dffits)
    np.sqrt(dffits, out=dffits)
    np.multiply(stud, dffits, out=dffits)
    bonf = t_quantile(df - 1, 1 - OUTLIER_ALPHA / (2 * n)) if df > 1 else NAN
    cook_cut = f_quantile(p, df, 0.5) if df > 0 else NAN
    lev_cut = 2 * p / n
    if exact or df < 1:
        std = stud = cook = dffits = np.full(n, NAN)
    tests = _tests(e, ee, dec, degree, exact, df)
    lof = lack_of_fit(x, dec.zw, dec.sqrt_w, rss, p, distinct)
    outliers = tuple(index[(stud > bonf) | (stud < -bonf)].tolist())  # |stud| > bonf
    high = tuple(index[h > lev_cut].tolist()) if n > p else ()
    infl = tuple(index[cook > cook_cut].tolist())
    thresholds = {"outlier_alpha": OUTLIER_ALPHA, "outlier_t": bonf, "leverage": lev_cut,
                  "cooks_distance": cook_cut, "dffits": float(2 * np.sqrt(p / n)),
                  **flags.THRESHOLDS}
    return Diagnostics(frozen_array(index, dtype=int), frozen_array(raw), frozen_array(std),
                       frozen_array(stud), frozen_array(h), frozen_array(cook),
                       frozen_array(dffits), tests, lof, outliers, high, infl, thresholds)


def _tests(e: np.ndarray, ee: np.ndarray, dec: Decomposition, degree: int, exact: bool,
           df: int) -> tuple[TestResult, ...]:
    if exact or df < 1:
        why = "exact fit: residuals are rounding noise" if exact else "no residual df"
        return tuple(TestResult(name, NAN, NAN, None, f"not computed ({why})")
                     for name in ("shapiro_wilk", "breusch_pagan", "durbin_watson"))
    return (shapiro_wilk(e), _breusch_pagan(ee, dec, degree), _durbin_watson(e))


def _breusch_pagan(ee: np.ndarray, dec: Decomposition, degree: int) -> TestResult:
    """Koenker's studentized form: LM = n R² of e² on (1, t, ..., t^d), chi² on d df.

    ``ee`` holds the squared residuals.
    """
    n = ee.size
    if degree < 1 or n <= degree + 1:
        return TestResult("breusch_pagan", NAN, NAN, None,
                          "needs at least one power of x and more points than coefficients")
    zc = ee - ee.sum() / n
    if dec.sqrt_w is None and dec.intercept:
        qa = dec.q[:degree + 1]  # already an orthonormal basis of (1, t, ..., t^d)
    else:
        rows = np.vander(dec.t, degree + 1, increasing=True)
        qa = np.linalg.qr(rows)[0].T
    proj = np.einsum("ij,j->i", qa, zc)
    ss = dot(zc, zc)
    if not ss > 0:
        return TestResult("breusch_pagan", NAN, NAN, (float(degree),),
                          "not computed: squared residuals are constant")
    lm = n * dot(proj, proj) / ss
    pv = float(special.chdtrc(degree, lm))
    return TestResult("breusch_pagan", lm, pv, (float(degree),),
                      "Koenker's studentized LM test of constant variance against the powers of x")


def _durbin_watson(e: np.ndarray) -> TestResult:
    d = np.diff(e)
    ss = dot(e, e)
    dw = dot(d, d) / ss if ss > 0 else NAN
    return TestResult("durbin_watson", dw, NAN, None,
                      "serial correlation in the given order: ~2 none, <2 positive, >2 negative")
