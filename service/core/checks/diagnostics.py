"""The shared residual diagnostics of a fit: per-point forms, formal tests, flagged points.

Every family hands the same numbers in: weighted residuals ``e_i = sqrt(w_i)
(y_i - ŷ_i)`` (for unweighted fits, the plain residuals, so all residual forms
share one variance), leverages ``h_i`` (the hat-matrix diagonal; the
tangent-plane one for nonlinear models), the parameter count ``p`` and the
residual SS, and optionally an orthonormal basis of the (weighted, tangent-plane)
design for the Durbin-Watson p-value. Nothing here knows how the curve was fitted.

Thresholds (also returned in ``Diagnostics.thresholds``; the flag rules and the
family-wise level are in :mod:`service.core.checks.flags`):

* outlier: |externally studentized residual| above the two-sided Bonferroni t
  critical value ``t_{df-1}(1 - alpha/(2n))`` (Cook & Weisberg 1982), alpha the
  per-test level :data:`service.core.checks.flags.TEST_ALPHA`;
* high leverage: ``h > 2p/n`` (Hoaglin & Welsch 1978);
* influential: Cook's distance above the median of ``F(p, n - p)``
  (Cook 1977; Cook & Weisberg 1982); ``|DFFITS| > 2 sqrt(p/n)`` (Belsley, Kuh &
  Welsch 1980) is reported as a threshold for reference;
* Durbin-Watson: one-sided p-value for positive serial correlation
  (:mod:`service.core.checks.durbin_watson`);
* the levels the trust flags use (per-test and family-wise alpha, points per
  coefficient, condition number) are added from
  :data:`service.core.checks.flags.THRESHOLDS`.
"""

from __future__ import annotations

import math

import numpy as np

from service.core.checks import durbin_watson, flags
from service.core.checks import kernels as checks_kernels
from service.core.checks.lack_of_fit import lack_of_fit
from service.core.checks.quantiles import f_quantile, t_quantile
from service.core.checks.shapiro import NOTE as SW_NOTE
from service.core.checks.shapiro_tables import SHAPIRO_MAX_N, shapiro_weights
from service.core.results import Diagnostics, LackOfFit, TestResult, frozen_array, frozen_rows

NAN = float("nan")
OUTLIER_ALPHA = flags.TEST_ALPHA   # the Bonferroni outlier test is one of the flag tests
NO_WEIGHTS = np.empty(0)
NO_WEIGHTS.setflags(write=False)  # read-only like the cached weights (one compiled signature)


def cut_offs(n: int, p: int, df: int) -> np.ndarray:
    """``(outlier t, leverage, Cook's distance)`` cut-offs of a fit with ``p`` parameters."""
    bonf = t_quantile(df - 1, 1 - OUTLIER_ALPHA / (2 * n)) if df > 1 else NAN
    cook_cut = f_quantile(p, df, 0.5) if df > 0 else NAN
    return np.array((bonf, 2 * p / n, cook_cut))


def shapiro_coefficients(n: int, tested: bool) -> np.ndarray:
    """Royston's weights for ``n`` points, or empty when the test is not run."""
    return shapiro_weights(n) if tested and 3 <= n <= SHAPIRO_MAX_N else NO_WEIGHTS


MIN_TEST_DF = 2
"""Residual degrees of freedom the residual tests need (with one, every scale-free
statistic of the residuals is fixed by the design)."""

ONE_DF = ("one residual degree of freedom: the residuals are one fixed vector times a scale, "
          "so the test would judge the x design, not the data")


def formal_tests(tested: bool, exact: bool, n: int, sw: tuple, bp: TestResult,
                 dw: TestResult, df: int = MIN_TEST_DF) -> tuple[TestResult, ...]:
    """Shapiro-Wilk, Breusch-Pagan and Durbin-Watson results, or why they were not run.

    ``sw`` is ``(status, w, p)`` from :func:`service.core.checks.kernels.residual_tests`;
    ``dw`` comes from :func:`durbin_watson_result`. With ``df`` = 1 residual degree of
    freedom the tests are not run: every scale-free statistic of the residuals is then fixed
    by the design (three evenly spaced points always give Shapiro-Wilk's smallest W, 0.75).
    """
    if tested and df >= MIN_TEST_DF:
        return (shapiro_result(*sw, n), bp, dw)
    why = ("exact fit: residuals are rounding noise" if exact else ONE_DF if tested
           else "no residual df")
    return tuple(TestResult(name, NAN, NAN, None, f"not computed ({why})")
                 for name in ("shapiro_wilk", "breusch_pagan", "durbin_watson"))


def durbin_watson_result(dw: float, p_value: float,
                         note: str = durbin_watson.NOTE) -> TestResult:
    """The Durbin-Watson row: ``d`` and its one-sided p-value for positive serial correlation
    (:func:`service.core.checks.durbin_watson.p_value_one`)."""
    if math.isnan(dw):
        return TestResult("durbin_watson", NAN, NAN, None,
                          "not computed: the residuals are all zero")
    return TestResult("durbin_watson", dw, p_value, None, note)


def shapiro_result(status: int, w: float, w_p: float, n: int) -> TestResult:
    """The Shapiro-Wilk row from the compiled status and numbers."""
    if status == checks_kernels.SW_COMPUTED:
        return TestResult("shapiro_wilk", w, w_p, None, SW_NOTE)
    if status == checks_kernels.SW_CONSTANT:
        return TestResult("shapiro_wilk", NAN, NAN, None, "not computed: residuals are constant")
    return TestResult("shapiro_wilk", NAN, NAN, None,
                      f"not computed: the test is defined for 3 to {SHAPIRO_MAX_N} points, "
                      f"got {n}")


def breusch_pagan_result(lm: float, lm_p: float, bp_df: int, against: str) -> TestResult:
    """Koenker's studentized Breusch-Pagan row: ``LM = n R²`` of ``e²`` on the auxiliary
    regressors (``against`` says which), chi² on ``bp_df`` df."""
    if math.isnan(lm):
        return TestResult("breusch_pagan", NAN, NAN, (float(bp_df),),
                          "not computed: squared residuals are constant")
    return TestResult("breusch_pagan", lm, lm_p, (float(bp_df),),
                      f"Koenker's studentized LM test of constant variance against {against}")


def assemble(index: np.ndarray, out: np.ndarray, sqrt_w: np.ndarray | None,
             tests: tuple[TestResult, ...], lof: LackOfFit | None, flagged: tuple,
             cuts: np.ndarray, n: int, p: int) -> Diagnostics:
    """Freeze the per-point rows of ``out`` (e, h, std, stud, Cook, DFFITS) and the tests."""
    bonf, lev_cut, cook_cut = cuts.tolist()
    thresholds = {"outlier_alpha": OUTLIER_ALPHA, "outlier_t": bonf, "leverage": lev_cut,
                  "cooks_distance": cook_cut, "dffits": 2 * math.sqrt(p / n), **flags.THRESHOLDS}
    e, h, std, stud, cook, dffits = frozen_rows(out)
    raw = e if sqrt_w is None else frozen_array(e / sqrt_w)
    outliers, high, infl = flagged
    return Diagnostics(frozen_array(index, dtype=int), raw, std, stud, h, cook, dffits, tests,
                       lof, tuple(outliers.tolist()), tuple(high.tolist()),
                       tuple(infl.tolist()), thresholds)


def residual_diagnostics(index: np.ndarray, x: np.ndarray, e: np.ndarray, h: np.ndarray,
                         zw: np.ndarray, sqrt_w: np.ndarray | None, p: int, rss: float,
                         exact: bool, distinct: int, auxiliary: np.ndarray,
                         against: str, basis: np.ndarray | None = None) -> Diagnostics:
    """Diagnostics of any fit from its weighted residuals and leverages.

    Parameters
    ----------
    index : original positions of the used points.
    x : x of the used points (lack-of-fit levels).
    e, h : weighted residuals and leverages.
    zw : weighted responses ``sqrt(w) y`` (pure error of the lack-of-fit test).
    sqrt_w : square roots of the weights, or None for an unweighted fit.
    p : number of fitted parameters; ``rss`` the residual SS.
    exact : the fit reproduces every point (residuals are rounding noise).
    distinct : number of distinct x values.
    auxiliary : (n, d) regressors of the Breusch-Pagan test, without the constant
        (d = 0 skips the test); ``against`` names them in the test's note.
    basis : (n, p) orthonormal basis of the weighted design (for a nonlinear model, of
        its weighted Jacobian at the solution), rows in the given order: the moments
        of the Durbin-Watson statistic. None uses Durbin & Watson's lower bound, whose
        p-value is conservative for any design of ``p`` columns.
    """
    n = e.size
    df = n - p
    tested = not exact and df >= 1
    out = np.empty((6, n))
    out[0], out[1] = e, h
    with np.errstate(all="ignore"):
        checks_kernels.point_forms(out, 0, n, p, rss, df)
        if not tested:
            out[2:] = NAN
        ss = float(e @ e)
        ss_diff = float(np.sum(np.diff(e) ** 2))
        zc = e * e - ss / n
        aux_basis = np.linalg.qr(np.column_stack((np.ones(n), auxiliary)))[0]
        proj = aux_basis.T @ zc
    bp_df = auxiliary.shape[1] if n > auxiliary.shape[1] + 1 else 0
    status, w, w_p, lm, lm_p, dw = checks_kernels.residual_tests(
        out[0], ss, ss_diff, proj, float(zc @ zc), bp_df, tested,
        shapiro_coefficients(n, tested))
    bp = (breusch_pagan_result(lm, lm_p, bp_df, against) if bp_df else
          TestResult("breusch_pagan", NAN, NAN, None,
                     "needs at least one auxiliary regressor and more points than regressors"))
    if basis is not None:
        dw_row = durbin_watson_result(dw, durbin_watson.p_value_one(
            dw, n - p, *durbin_watson.design_traces(basis)))
    else:
        dw_row = durbin_watson_result(dw, durbin_watson.p_value_one(
            dw, n - p, *durbin_watson.bound_traces(n, p)), note=durbin_watson.NOTE_BOUND)
    tests = formal_tests(tested, exact, n, (status, w, w_p), bp, dw_row, df)
    cuts = cut_offs(n, p, df)
    flagged = (checks_kernels.positions(index, out[3], cuts[0], True),
               checks_kernels.positions(index, out[1], cuts[1], False) if n > p else index[:0],
               checks_kernels.positions(index, out[4], cuts[2], False))
    lof = lack_of_fit(x, zw, sqrt_w, rss, p, distinct)
    return assemble(index, out, sqrt_w, tests, lof, flagged, cuts, n, p)
