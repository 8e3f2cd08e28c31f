"""Flags of the compiled rows of a nonlinear batch, in one compiled pass over the rows.

The rules of :func:`.curves_post.finish` (the single fit's, see that module): each fired
rule sets its bit of :data:`~.curves_results.CURVE_FLAG_CODES` in ``mask`` and its severity
(0 info, 1 warning, 2 serious) in two bits of ``levels``. Influence and leverage are
warnings only when one of their points is also an outlier.
"""

from __future__ import annotations

import numba
import numpy as np

from service.core.batch.curves_kernel import S
from service.core.batch.curves_results import CURVE_FLAG_CODES
from service.core.checks.flags import POINTS_PER_PARAMETER, TEST_ALPHA
from service.core.nonlinear.flags import CORRELATION_CUT, RELATIVE_SE_CUT

_B = {code: i for i, code in enumerate(CURVE_FLAG_CODES)}
_REDUNDANT, _POORLY = _B["parameters_nearly_redundant"], _B["poorly_determined_parameter"]
_CHI, _FEW, _LOF = _B["chi_square_fit_failed"], _B["few_points_per_parameter"], _B["lack_of_fit"]
_NORMAL, _VARIANCE = _B["non_normal_residuals"], _B["non_constant_variance"]
_SERIAL, _OUTLIERS = _B["serial_correlation"], _B["outliers"]
_INFLUENTIAL, _HIGH = _B["influential_points"], _B["high_leverage"]
_CORR, _NOUT, _NINF = S["max_correlation"], S["n_outliers"], S["n_influential"]
_NHIGH, _NBOTH = S["n_high_leverage"], S["n_influential_outliers"]
_NLEVER = S["n_high_leverage_influential_outliers"]


@numba.njit(cache=True, nogil=True, error_model="numpy", inline="always")
def _fire(mask, levels, fired, bit, level):
    """``mask`` and ``levels`` with rule ``bit`` set at ``level`` when ``fired``."""
    if fired:
        return mask | (1 << bit), levels | (level << (2 * bit))
    return mask, levels


@numba.njit(cache=True, nogil=True, error_model="numpy")
def flag_masks(stats, est, se, n, p, chi_p, lof_p, sw_p, bp_p, dw_p):
    """Bit masks and severity levels of the rows of ``stats`` (kernel columns), with their
    estimates and standard errors (rows x p), lengths and the tests' p-values.

    Returns
    -------
    mask, levels : (rows,) int64
    """
    rows = n.size
    mask, levels = np.zeros(rows, dtype=np.int64), np.zeros(rows, dtype=np.int64)
    for r in range(rows):
        poorly = False                  # a relative standard error above the cut (or NaN)
        for j in range(est.shape[1]):
            relative = abs(se[r, j] / est[r, j]) if est[r, j] != 0 else np.inf
            poorly |= not relative <= RELATIVE_SE_CUT
        both = stats[r, _NBOTH] > 0
        m, lv = _fire(0, 0, stats[r, _CORR] > CORRELATION_CUT, _REDUNDANT, 1)
        m, lv = _fire(m, lv, poorly, _POORLY, 1)
        m, lv = _fire(m, lv, chi_p[r] < TEST_ALPHA, _CHI, 2)
        m, lv = _fire(m, lv, n[r] < POINTS_PER_PARAMETER * p, _FEW, 0)
        m, lv = _fire(m, lv, lof_p[r] < TEST_ALPHA, _LOF, 2)
        m, lv = _fire(m, lv, sw_p[r] < TEST_ALPHA, _NORMAL, 1)
        m, lv = _fire(m, lv, bp_p[r] < TEST_ALPHA, _VARIANCE, 1)
        m, lv = _fire(m, lv, dw_p[r] < TEST_ALPHA, _SERIAL, 1)
        m, lv = _fire(m, lv, stats[r, _NOUT] > 0, _OUTLIERS, 1)
        m, lv = _fire(m, lv, stats[r, _NINF] > 0, _INFLUENTIAL, 1 if both else 0)
        m, lv = _fire(m, lv, stats[r, _NHIGH] > 0, _HIGH, 1 if stats[r, _NLEVER] > 0 else 0)
        mask[r], levels[r] = m, lv
    return mask, levels
