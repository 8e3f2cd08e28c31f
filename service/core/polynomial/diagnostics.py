"""Diagnostics of the chosen polynomial fit, in two compiled calls over its basis.

The residuals and leverages come from the fit's orthonormal basis
(:func:`service.core.polynomial.compiled.points.point_measures`); the
per-point forms, the formal tests, the cut-offs and the frozen result are the
shared ones of :mod:`service.core.checks.diagnostics` (which documents the
thresholds). Breusch-Pagan regresses the squared residuals on the powers of x; the
Durbin-Watson p-value takes its moments from the fit's own weighted basis.
"""

from __future__ import annotations

import numpy as np

from service.core.checks.diagnostics import (
    NAN,
    assemble,
    breusch_pagan_result,
    cut_offs,
    durbin_watson_result,
    formal_tests,
    shapiro_coefficients,
)
from service.core.checks.lack_of_fit import lack_of_fit
from service.core.polynomial.compiled import checks as kernels_checks
from service.core.polynomial.compiled import points as kernels_points
from service.core.polynomial.decomposition import Decomposition
from service.core.polynomial.qr import triangular_inverse
from service.core.results import Diagnostics, TestResult

_NO_BASIS = np.empty((0, 0))


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
    The per-point forms (see :func:`service.core.checks.kernels.point_forms`)
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
    cuts = cut_offs(n, p, df)
    sums = kernels_points.point_measures(dec.t, dec.weights, dec.zw, dec.first,
                                         np.ascontiguousarray(dec.r_inv64[:p, :p]),
                                         dec.effects64, p, rss, df, bp_rinv, out)
    status, w, w_p, lm, lm_p, dw, outliers, high, infl, dw_p = kernels_checks.fit_checks(
        out, sums, p, bp_rinv, tested, shapiro_coefficients(n, tested), index, cuts)
    dw_row = durbin_watson_result(dw, dw_p) if tested else None
    tests = formal_tests(tested, exact, n, (status, w, w_p), _breusch_pagan(n, degree, lm, lm_p),
                         dw_row, df)
    lof = lack_of_fit(x, dec.zw, dec.sqrt_w, rss, p, distinct)
    return assemble(index, out, dec.sqrt_w, tests, lof, (outliers, high, infl), cuts, n, p)


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
    return breusch_pagan_result(lm, lm_p, degree, "the powers of x")
