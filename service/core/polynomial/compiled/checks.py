"""Compiled diagnostics of one polynomial fit in one call: per-point forms, the three formal
tests (Durbin-Watson with its p-value) and the flagged points.

:func:`fit_checks` runs the shared tests of :mod:`service.core.checks.kernels` on
the residuals and sums of ``points.point_measures`` (residuals and leverages from the
fit's basis, then the shared per-point forms), which the caller runs first; the
Breusch-Pagan regressors are the unweighted powers of ``t``.
"""

from __future__ import annotations

import numba
import numpy as np

from service.core.checks.kernels import dw_p, dw_traces, positions, residual_tests


@numba.njit(cache=True, nogil=True, error_model="numpy")
def fit_checks(out, sums, p, bp_rinv, tested, sw_coef, index, cuts):
    """The tests and flagged points from ``out`` and the sums of ``points.point_measures``.

    ``out`` (6 x n) holds the per-point forms and ``sums`` what ``point_measures``
    returned for them, ``(ss, ss_diff, proj, ss_zc, dw_sums)``; the caller runs that
    kernel from Python (compiled into this one, its reassociated sums ran with other
    roundings once this kernel was loaded from numba's cache than when it was compiled in
    the process). ``tested`` False (exact fit or no residual df) leaves the studentized
    rows of ``out`` NaN and the tests NaN. ``sw_coef`` holds the Shapiro-Wilk weights
    for ``n`` points, or is empty to skip the test. ``cuts`` = (outlier t,
    leverage, Cook's distance); ``index`` maps positions to the caller's.

    Returns
    -------
    sw_status : SW_COMPUTED, SW_CONSTANT (residuals all equal) or SW_SKIPPED.
    w, w_p, lm, lm_p, dw : float
        Shapiro-Wilk W and p, Breusch-Pagan LM and p (NaN when ``bp_rinv`` is
        empty or the squared residuals are constant), Durbin-Watson.
    outliers, high, influential : int64 arrays of caller positions.
    dw_p : float
        One-sided p-value of Durbin-Watson's d for positive serial correlation, from
        the design's moments (``point_measures``' sums, ``kernels.dw_p``).
    """
    n = out.shape[1]
    ss, ss_diff, proj, ss_zc, dw_sums = sums
    if not tested:
        out[2:] = np.nan
    status, w, w_p, lm, lm_p, dw = residual_tests(out[0], ss, ss_diff, proj, ss_zc,
                                                  bp_rinv.shape[0] - 1, tested, sw_coef)
    outliers = positions(index, out[3], cuts[0], True)
    high = positions(index, out[1], cuts[1], False) if n > p else index[:0]
    influential = positions(index, out[4], cuts[2], False)
    tr1, tr2 = dw_traces(n, dw_sums[0], dw_sums[1], dw_sums[2])
    return status, w, w_p, lm, lm_p, dw, outliers, high, influential, dw_p(dw, float(n - p),
                                                                           tr1, tr2)
