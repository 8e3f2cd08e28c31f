"""One pass over a series' (pooled) points for the logistic4 solver of the nonlinear batch.

:func:`linearize4` is :func:`.curves_linearize.linearize` with second derivatives for
the two logistic4 families (log and linear x), the curve, its gradient and second
derivatives (:func:`.curves_models.point`, :func:`.curves_models.curvature`) computed at
each point in the loop and every sum held in registers: the same operations in the same
order, returned as tuples of scalars for :func:`.curves_solver4.solve4`.
"""

from __future__ import annotations

import math

import numba
import numpy as np

EPS = float(np.finfo(float).eps)
FAIL = (np.nan,) * 10
"""The placeholder triangle (or, sliced, vector) of a failed pass or factor."""


@numba.njit(cache=True, nogil=True, error_model="numpy")
def linearize4(log_x, t, u, y, sw, pure, fj):
    """One pass over the (pooled) points at ``t`` (a 4-tuple), as
    :func:`.curves_linearize.linearize` with second derivatives: returns
    ``(finite, rss + pure, floor, slack, a, g, d, cm)``, ``a`` and ``cm`` the lower
    triangles (row by row) of the scaled ``Js'Js`` and curvature term. The curve at the
    ``m`` points goes to ``fj[:m]`` and its gradient to ``fj[m:5m]`` (one row of m values
    per parameter), for the inference at the estimates."""
    left, right, slope, ec50 = t
    if log_x:
        c0, c1 = math.log(ec50), -slope / ec50
        dc, eta_ee = 1.0 / ec50, slope / (ec50 * ec50)
    else:
        c0, c1 = ec50, -slope
        dc, eta_ee = 1.0, 0.0
    span = left - right
    worst = slack = rss = 0.0
    g0 = g1 = g2 = g3 = 0.0
    a00 = a10 = a11 = a20 = a21 = a22 = a30 = a31 = a32 = a33 = 0.0
    h20 = h21 = h22 = h30 = h31 = h32 = h33 = 0.0
    m = y.size
    for i in range(m):              # the exponentials first, apart from the sums
        fj[m + i] = 1.0 / (1.0 + math.exp(slope * (u[i] - c0)))
    for i in range(m):
        ui = u[i]
        bi = fj[m + i]
        dg = -bi * (1.0 - bi) * span
        dd = ui - c0 if ui > -np.inf else 0.0
        r0, r1, r2, r3 = bi, 1.0 - bi, dg * dd, dg * c1
        fi = right + span * bi
        if ui == -np.inf and not slope > 0:
            fi = np.nan
        fj[i], fj[m + i], fj[2 * m + i], fj[3 * m + i], fj[4 * m + i] = fi, r0, r1, r2, r3
        w = sw[i]
        ri = w * (y[i] - fi)
        rss += ri * ri
        rounding = 4.0 * EPS * w * (abs(y[i]) + abs(fi))
        worst = max(worst, rounding)
        slack += 2.0 * abs(ri) * rounding + rounding * rounding
        c_0, c_1, c_2, c_3 = r0 * w, r1 * w, r2 * w, r3 * w
        g0 += c_0 * ri
        g1 += c_1 * ri
        g2 += c_2 * ri
        g3 += c_3 * ri
        a00 += c_0 * c_0
        a10 += c_1 * c_0
        a11 += c_1 * c_1
        a20 += c_2 * c_0
        a21 += c_2 * c_1
        a22 += c_2 * c_2
        a30 += c_3 * c_0
        a31 += c_3 * c_1
        a32 += c_3 * c_2
        a33 += c_3 * c_3
        q1 = -bi * (1.0 - bi)                          # curvature (curves_models.curvature)
        q2 = q1 * (2.0 * bi - 1.0)
        wr = w * ri
        h20 += wr * (q1 * dd)
        h21 += wr * (-q1 * dd)
        h22 += wr * (span * q2 * dd * dd)
        h30 += wr * (q1 * c1)
        h31 += wr * (-q1 * c1)
        h32 += wr * (span * (q2 * dd * c1 - q1 * dc))
        h33 += wr * (span * (q2 * c1 * c1 + q1 * eta_ee))
    if not math.isfinite(rss):
        return False, np.inf, 0.0, 0.0, FAIL, FAIL[:4], FAIL[:4], FAIL
    d0, d1, d2, d3 = math.sqrt(a00), math.sqrt(a11), math.sqrt(a22), math.sqrt(a33)
    if not (math.isfinite(d0) and math.isfinite(d1) and math.isfinite(d2)
            and math.isfinite(d3) and math.isfinite(g0) and math.isfinite(g1)
            and math.isfinite(g2) and math.isfinite(g3)):
        return False, np.inf, 0.0, 0.0, FAIL, FAIL[:4], FAIL[:4], FAIL
    # scaled by the reciprocals of the norms, as curves_linearize._scale: 4 divisions rather
    # than 24 (a norm of 0 counts as 1; the check then stops as singular)
    i0 = 1.0 / d0 if d0 > 0 else 1.0
    i1 = 1.0 / d1 if d1 > 0 else 1.0
    i2 = 1.0 / d2 if d2 > 0 else 1.0
    i3 = 1.0 / d3 if d3 > 0 else 1.0
    g0, g1, g2, g3 = g0 * i0, g1 * i1, g2 * i2, g3 * i3
    a00, a11, a22, a33 = a00 * (i0 * i0), a11 * (i1 * i1), a22 * (i2 * i2), a33 * (i3 * i3)
    a10, a20, a21 = a10 * (i1 * i0), a20 * (i2 * i0), a21 * (i2 * i1)
    a30, a31, a32 = a30 * (i3 * i0), a31 * (i3 * i1), a32 * (i3 * i2)
    h20, h21, h22 = h20 * (i2 * i0), h21 * (i2 * i1), h22 * (i2 * i2)
    h30, h31, h32, h33 = h30 * (i3 * i0), h31 * (i3 * i1), h32 * (i3 * i2), h33 * (i3 * i3)
    return (True, rss + pure, 4.0 * worst, slack,
            (a00, a10, a11, a20, a21, a22, a30, a31, a32, a33), (g0, g1, g2, g3),
            (d0, d1, d2, d3), (0.0, 0.0, 0.0, h20, h21, h22, h30, h31, h32, h33))


linearize4_inline = numba.njit(cache=True, nogil=True, error_model="numpy",
                               inline="always")(linearize4.py_func)
""":func:`linearize4` compiled into its caller: for the solver's two hot passes (the Newton
and the damped trial; each copy adds several seconds to the cold compile)."""
