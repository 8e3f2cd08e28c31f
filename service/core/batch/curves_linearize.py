"""One pass over a series' (pooled) points for the nonlinear batch solver.

:func:`linearize` forms, at given parameters, the column-scaled normal matrix of the
weighted Jacobian, its gradient, the column norms, the residual sum of squares with its
rounding floor and slack, and (for families with second derivatives) the scaled
curvature term of the Hessian; four-parameter families take a path with the sums held in
registers (the same operations in the same order).
"""

from __future__ import annotations

import math

import numba
import numpy as np

from service.core.batch.curves_models import constants, curvature, point, prepass

EPS = float(np.finfo(float).eps)


@numba.njit(cache=True, nogil=True, error_model="numpy", inline="always")
def linearize(fid, theta, u, y, sw, p, a, g, d, row, buf, second, cm, hess):
    """One pass over the points at ``theta``: scaled ``Js'Js`` into ``a``, ``Js' r`` into
    ``g`` and the column norms of ``sqrt(W) J`` into ``d`` (``Js = sqrt(W) J D^-1``);
    with ``second``, the scaled curvature term ``D^-1 (sum w r H) D^-1`` of the Hessian
    (``H`` the curve's second derivatives, :func:`.curves_models.curvature`) into ``cm``
    (``hess`` p x p scratch).

    Returns ``(finite, rss, floor, slack)``: False when the curve or a derivative is not
    finite; the rounding floor of ``||Q1' r||`` and the rounding slack of the RSS are
    those of :func:`service.core.nonlinear.polish.assess`.
    """
    if p == 4:
        return _linearize4(fid, theta, u, y, sw, a, g, d, row, buf, second, cm, hess)
    c0, c1 = constants(fid, theta)
    prepass(fid, theta, c0, u, buf)
    worst = slack = rss = 0.0
    for j in range(p):
        g[j] = 0.0
        for k in range(j + 1):
            a[j, k] = 0.0
            cm[j, k] = 0.0
    for i in range(y.size):
        fi = point(fid, theta, c0, c1, u[i], buf[i], row)
        w = sw[i]
        ri = w * (y[i] - fi)
        rss += ri * ri
        rounding = 4.0 * EPS * w * (abs(y[i]) + abs(fi))
        worst = max(worst, rounding)
        slack += 2.0 * abs(ri) * rounding + rounding * rounding
        for j in range(p):
            cj = row[j] * w
            g[j] += cj * ri
            for k in range(j + 1):
                a[j, k] += cj * (row[k] * w)
        if second:
            curvature(fid, theta, c0, c1, u[i], buf[i], hess)
            for j in range(p):
                for k in range(j + 1):
                    cm[j, k] += w * ri * hess[j, k]
    return _scale(p, a, g, d, cm, rss, worst, slack)


@numba.njit(cache=True, nogil=True, error_model="numpy", inline="always")
def _scale(p, a, g, d, cm, rss, worst, slack):
    """Column norms into ``d``, then ``a``, ``g`` and ``cm`` scaled by them (both triangles);
    the return value of :func:`linearize`."""
    if not math.isfinite(rss):
        return False, np.inf, 0.0, 0.0
    for j in range(p):
        d[j] = math.sqrt(a[j, j])
        if not math.isfinite(d[j]) or not math.isfinite(g[j]):
            return False, np.inf, 0.0, 0.0
    for j in range(p):       # by the reciprocals of the norms (a norm of 0 counts as 1)
        inv_j = 1.0 / d[j] if d[j] > 0 else 1.0
        g[j] *= inv_j
        for k in range(j + 1):
            inv_jk = inv_j * (1.0 / d[k] if d[k] > 0 else 1.0)
            a[j, k] *= inv_jk
            a[k, j] = a[j, k]
            cm[j, k] *= inv_jk
            cm[k, j] = cm[j, k]
    return True, rss, 2.0 * math.sqrt(p) * worst, slack


@numba.njit(cache=True, nogil=True, error_model="numpy", inline="always")
def _linearize4(fid, theta, u, y, sw, a, g, d, row, buf, second, cm, hess):
    """:func:`linearize` for four parameters, the sums held in registers (the same
    operations in the same order)."""
    c0, c1 = constants(fid, theta)
    prepass(fid, theta, c0, u, buf)
    worst = slack = rss = 0.0
    g0 = g1 = g2 = g3 = 0.0
    a00 = a10 = a11 = a20 = a21 = a22 = a30 = a31 = a32 = a33 = 0.0
    h00 = h10 = h11 = h20 = h21 = h22 = h30 = h31 = h32 = h33 = 0.0
    for i in range(y.size):
        fi = point(fid, theta, c0, c1, u[i], buf[i], row)
        w = sw[i]
        ri = w * (y[i] - fi)
        rss += ri * ri
        rounding = 4.0 * EPS * w * (abs(y[i]) + abs(fi))
        worst = max(worst, rounding)
        slack += 2.0 * abs(ri) * rounding + rounding * rounding
        r0, r1, r2, r3 = row[0], row[1], row[2], row[3]
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
        if second:
            curvature(fid, theta, c0, c1, u[i], buf[i], hess)
            wr = w * ri
            h00 += wr * hess[0, 0]
            h10 += wr * hess[1, 0]
            h11 += wr * hess[1, 1]
            h20 += wr * hess[2, 0]
            h21 += wr * hess[2, 1]
            h22 += wr * hess[2, 2]
            h30 += wr * hess[3, 0]
            h31 += wr * hess[3, 1]
            h32 += wr * hess[3, 2]
            h33 += wr * hess[3, 3]
    g[0], g[1], g[2], g[3] = g0, g1, g2, g3
    a[0, 0], a[1, 0], a[1, 1], a[2, 0], a[2, 1] = a00, a10, a11, a20, a21
    a[2, 2], a[3, 0], a[3, 1], a[3, 2], a[3, 3] = a22, a30, a31, a32, a33
    cm[0, 0], cm[1, 0], cm[1, 1], cm[2, 0], cm[2, 1] = h00, h10, h11, h20, h21
    cm[2, 2], cm[3, 0], cm[3, 1], cm[3, 2], cm[3, 3] = h22, h30, h31, h32, h33
    return _scale(4, a, g, d, cm, rss, worst, slack)
