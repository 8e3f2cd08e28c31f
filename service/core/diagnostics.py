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

import math

import numpy as np

from service.core import flags, kernels_checks
from service.core.anova import lack_of_fit
from service.core.batch_tests import SHAPIRO_MAX_N, shapiro_weights
from service.core.decomposition import Decomposition
from service.core.normality import NOTE as SW_NOTE
from service.core.qr import triangular_inverse
from service.core.results import Diagnostics, TestResult, frozen_array, frozen_rows
from service.core.summary import f_quantile, t_quantile

NAN = float("nan")
OUTLIER_ALPHA = 0.05
_NO_BASIS = np.empty((0, 0))
_NO_WEIGHTS = np.empty(0)
_NO_WEIGHTS.setflags(write=False)  # read-only like the cached weights (one signature)
DW_NOTE = "serial correlation in the given order: ~2 none, <2 positive, >2 negative"


def diagnose(index: np.ndarray, x: np.ndarray, dec: Decomposition, degree: int, rss: float,
             exact: bool, distinct: int) -> Diagnostics:
    """Compute the diagnostics of the chosen fit.

    Parameters
    ----------
    index : original positions of the used points.
    x : original x of the used points (lack-of-fit levels).
    dec : the decomposition the fit came from.
    degree : the chosen degree.
    rss : residual SS (0.0 for an exact fit).
    distinct : number of distinct x values.

    Notes
    -----
    The per-point forms (see :func:`service.core.kernels_points.point_measures`)
    are, with ``e`` the weighted residuals and ``h`` the leverages:
    ``std = e / (sigma sqrt(1-h))``, ``s_(i)² = (rss - e²/(1-h)) / (df-1)``,
    ``stud = e / sqrt(s_(i)² (1-h))``, ``cook = std² h / (p (1-h))`` and
    ``dffits = stud sqrt(h / (1-h))``.
    """
    n, p = x.size, dec.p(degree)
    df = n - p
    # runs inside fit_series' errstate (floating-point exceptions ignored)
    out = np.empty((6, n))
    tested = not exact and df >= 1
    bp_rinv = _bp_basis(dec, degree) if tested and 1 <= degree < n - 1 else _NO_BASIS
    sw_coef = shapiro_weights(n) if tested and 3 <= n <= SHAPIRO_MAX_N else _NO_WEIGHTS
    bonf = t_quantile(df - 1, 1 - OUTLIER_ALPHA / (2 * n)) if df > 1 else NAN
    cook_cut = f_quantile(p, df, 0.5) if df > 0 else NAN
    lev_cut = 2 * p / n
    status, w, w_p, lm, lm_p, dw, outliers, high, infl = kernels_checks.fit_checks(
        dec.t, dec.weights, dec.zw, dec.first, np.ascontiguousarray(dec.r_inv64[:p, :p]),
        dec.effects64, p, rss, df, bp_rinv, out, tested, sw_coef, index,
        np.array((bonf, lev_cut, cook_cut)))
    if tested:
        tests = (_shapiro_result(status, w, w_p, n),
                 _breusch_pagan(n, degree, lm, lm_p),
                 TestResult("durbin_watson", dw, NAN, None, DW_NOTE))
    else:
        why = "exact fit: residuals are rounding noise" if exact else "no residual df"
        tests = tuple(TestResult(name, NAN, NAN, None, f"not computed ({why})")
                      for name in ("shapiro_wilk", "breusch_pagan", "durbin_watson"))
    lof = lack_of_fit(x, dec.zw, dec.sqrt_w, rss, p, distinct)
    thresholds = {"outlier_alpha": OUTLIER_ALPHA, "outlier_t": bonf, "leverage": lev_cut,
                  "cooks_distance": cook_cut, "dffits": 2 * math.sqrt(p / n),
                  **flags.THRESHOLDS}
    e, h, std, stud, cook, dffits = frozen_rows(out)
    raw = e if dec.sqrt_w is None else frozen_array(e / dec.sqrt_w)
    return Diagnostics(frozen_array(index, dtype=int), raw, std, stud, h, cook, dffits, tests,
                       lof, tuple(outliers.tolist()), tuple(high.tolist()),
                       tuple(infl.tolist()), thresholds)


def _shapiro_result(status: int, w: float, w_p: float, n: int) -> TestResult:
    if status == kernels_checks.SW_COMPUTED:
        return TestResult("shapiro_wilk", w, w_p, None, SW_NOTE)
    if status == kernels_checks.SW_CONSTANT:
        return TestResult("shapiro_wilk", NAN, NAN, None, "not computed: residuals are constant")
    return TestResult("shapiro_wilk", NAN, NAN, None,
                      f"not computed: the test is defined for 3 to {SHAPIRO_MAX_N} points, "
                      f"got {n}")


def _bp_basis(dec: Decomposition, degree: int) -> np.ndarray:
    """``R^-1`` of the unweighted powers ``1, t, ..., t^degree``: the fit's own when it is
    unweighted with an intercept, else from a fresh QR."""
    if dec.sqrt_w is None and dec.intercept:
        return np.ascontiguousarray(dec.r_inv64[:degree + 1, :degree + 1])
    r = np.linalg.qr(np.vander(dec.t, degree + 1, increasing=True), mode="r")
    return np.ascontiguousarray(triangular_inverse(r))


def _breusch_pagan(n: int, degree: int, lm: float, lm_p: float) -> TestResult:
    """Koenker's studentized form: LM = n R² of e² on (1, t, ..., t^d), chi² on d df.

    The R² is ``||Q'zc||² / ||zc||²`` for the centred squared residuals ``zc``
    and an orthonormal basis ``Q`` of the unweighted powers of ``t``
    (``kernels_checks.fit_checks`` forms it and the tail probability).
    """
    if degree < 1 or n <= degree + 1:
        return TestResult("breusch_pagan", NAN, NAN, None,
                          "needs at least one power of x and more points than coefficients")
    if math.isnan(lm):
        return TestResult("breusch_pagan", NAN, NAN, (float(degree),),
                          "not computed: squared residuals are constant")
    return TestResult("breusch_pagan", lm, lm_p, (float(degree),),
                      "Koenker's studentized LM test of constant variance against the powers of x")
