"""Compiled Levenberg-Marquardt for one series of the nonlinear batch, with a tight stop.

Method: Levenberg-Marquardt on the normal equations of the column-scaled
weighted Jacobian ``Js = sqrt(W) J D^-1`` (``D``: column norms, so the damping
``lambda I`` is Marquardt's scaling), Cholesky factors of the small p x p
systems. Convergence is judged at a point with the single fit's criterion,
the Bates & Watts (1981) relative offset
``(||Q1' r|| / sqrt(p)) / (||r - Q1 Q1' r|| / sqrt(n - p))``, where
``||Q1' r||² = g' (Js'Js)^-1 g`` with ``g = Js' r``; the batch asks for
:data:`TARGET_OFFSET`, a hundred times tighter than the single fit's 1e-8
(:mod:`service.core.nonlinear.polish`), so that both stop within a tiny
fraction of a standard error of the same minimum. When rounding stops the
descent first, the single fit's own 1e-8 is accepted; ``small_gradient``
(``||Q1' r||`` at the rounding level of the data) is the same floor as there.
Anything else (a singular Jacobian, a stall, the iteration limit, a
non-finite curve) is reported, and the driver hands the series to the
single-fit engine.
"""

from __future__ import annotations

import math

import numba
import numpy as np

from service.core.batch.curves_models import evaluate

TARGET_OFFSET = 1e-10
ACCEPT_OFFSET = 1e-8       # the single fit's criterion (solver.DEFAULT_TOLERANCE)
MAX_ITERATIONS = 200
EPS = float(np.finfo(float).eps)
_SUM = {"reassoc", "nsz"}  # vectorized sums only; no assumption about NaN or infinity
FLAT_OFFSET = 1e-3         # as polish.FLAT_OFFSET
PIVOT_FLOOR = 1e-24        # squared scaled pivot: below it the tangent plane is singular
RELATIVE_OFFSET, SMALL_GRADIENT, STALLED, SINGULAR, LIMIT, NON_FINITE = 0, 1, 2, 3, 4, 5
CODES = ("relative_offset", "small_gradient", "stalled", "singular_jacobian", "iteration_limit",
         "non_finite_model")
"""Termination codes (the first two mean converged, as in the single fit)."""


@numba.njit(cache=True, nogil=True, error_model="numpy")
def cholesky(a, p, low):
    """Lower Cholesky factor of ``a[:p, :p]`` into ``low``; False when not positive definite."""
    for j in range(p):
        s = a[j, j]
        for k in range(j):
            s -= low[j, k] * low[j, k]
        if not s > PIVOT_FLOOR:
            return False
        low[j, j] = math.sqrt(s)
        for i in range(j + 1, p):
            t = a[i, j]
            for k in range(j):
                t -= low[i, k] * low[j, k]
            low[i, j] = t / low[j, j]
    return True


@numba.njit(cache=True, nogil=True, error_model="numpy")
def forward(low, p, b, out):
    """Solve ``low z = b``; returns ``||z||²``."""
    total = 0.0
    for i in range(p):
        t = b[i]
        for k in range(i):
            t -= low[i, k] * out[k]
        out[i] = t / low[i, i]
        total += out[i] * out[i]
    return total


@numba.njit(cache=True, nogil=True, error_model="numpy")
def backward(low, p, z, out):
    """Solve ``low' x = z``."""
    for i in range(p - 1, -1, -1):
        t = z[i]
        for k in range(i + 1, p):
            t -= low[k, i] * out[k]
        out[i] = t / low[i, i]


@numba.njit(cache=True, nogil=True, error_model="numpy", fastmath=_SUM)
def _dot(a, b):
    total = 0.0
    for i in range(a.size):
        total += a[i] * b[i]
    return total


@numba.njit(cache=True, nogil=True, error_model="numpy")
def normal_equations(jac, y, f, sw, p, a, g, d, r):
    """Scaled ``Js'Js`` into ``a``, ``Js' r`` into ``g``, column norms of ``sqrt(W) J`` into
    ``d`` (``Js = sqrt(W) J D^-1``), in one pass over the points.

    ``r`` receives the weighted residuals. Returns the RSS (NaN when a column is zero),
    the rounding floor of ``||Q1' r||`` and the rounding slack of the RSS (as
    :func:`service.core.nonlinear.polish.assess`).
    """
    n = y.size
    worst = slack = rss = 0.0
    for j in range(p):
        g[j] = 0.0
        for k in range(j + 1):
            a[j, k] = 0.0
    for i in range(n):
        w = sw[i]
        ri = w * (y[i] - f[i])
        r[i] = ri
        rss += ri * ri
        rounding = 4.0 * EPS * w * (abs(y[i]) + abs(f[i]))
        worst = max(worst, rounding)
        slack += 2.0 * abs(ri) * rounding + rounding * rounding
        ww = w * w
        for j in range(p):
            cj = jac[j, i] * ww
            g[j] += jac[j, i] * w * ri
            for k in range(j + 1):
                a[j, k] += cj * jac[k, i]
    for j in range(p):
        d[j] = math.sqrt(a[j, j])
        if not d[j] > 0:
            return np.nan, 0.0, 0.0
    for j in range(p):
        g[j] /= d[j]
        for k in range(j + 1):
            a[j, k] /= d[j] * d[k]
            a[k, j] = a[j, k]
    return rss, 2.0 * math.sqrt(p) * worst, slack


@numba.njit(cache=True, nogil=True, error_model="numpy")
def check(jac, y, f, sw, p, a, g, d, low, z, pure, n, r):
    """The convergence check at the current point: ``(code, rss, offset, slack)``.

    ``pure`` is the RSS part no curve can change and ``n`` the number of points (see
    :func:`solve`).

    ``code`` is RELATIVE_OFFSET or SMALL_GRADIENT when met, SINGULAR for a singular
    tangent plane, STALLED for a zero residual, else -1 (go on).
    """
    rss, floor, slack = normal_equations(jac, y, f, sw, p, a, g, d, r)
    rss += pure
    if rss != rss or not cholesky(a, p, low):
        return SINGULAR, rss, np.nan, 0.0
    proj2 = forward(low, p, g, z)
    orth2 = rss - proj2
    if math.sqrt(proj2) <= floor:
        offset = math.sqrt(proj2 / p) / math.sqrt(orth2 / (n - p)) if orth2 > 0 else 0.0
        return SMALL_GRADIENT, rss, offset, slack
    if not orth2 > 0:
        return STALLED, rss, np.inf, slack
    offset = math.sqrt(proj2 / p) / math.sqrt(orth2 / (n - p))
    return (RELATIVE_OFFSET if offset <= TARGET_OFFSET else -1), rss, offset, slack


@numba.njit(cache=True, nogil=True, error_model="numpy")
def solve(fid, theta, u, y, sw, f, ftrial, jac, jtrial, mats, max_iterations, pure, n):
    """Levenberg-Marquardt from ``theta`` (updated in place) to the tight stop.

    The data may be pooled by distinct x (replicates): ``y`` the weighted mean response
    at each ``u``, ``sw`` the square roots of the summed weights, ``pure`` the weighted
    scatter about those means (the pure-error sum of squares, a constant part of the
    RSS) and ``n`` the number of points; the RSS, gradient and relative offset are those
    of the points, at a third of the work for triplicates.

    Scratch: ``f``, ``ftrial`` (n), ``jac``, ``jtrial`` (p x n), ``mats`` ((5p + 7) x p).
    On a converged return ``mats[0:p]`` the Cholesky factor of the scaled ``Js'Js`` there and
    ``mats[4p + 2]`` the column norms ``D``.

    A step is accepted when it lowers the RSS; once the relative offset is below
    ``FLAT_OFFSET``, where the RSS is flat to first order and float64 cannot confirm
    a step, also when the RSS stays within its rounding slack and the relative
    offset falls (as the single fit's polish does).

    Returns
    -------
    code : int (:data:`CODES`), rss : float, offset : float, iterations : int
    """
    m_points, p = y.size, theta.size
    low, a, m, low_m = mats[0:p], mats[p:2 * p], mats[2 * p:3 * p], mats[3 * p:4 * p]
    g, z, d, step = mats[4 * p], mats[4 * p + 1], mats[4 * p + 2], mats[4 * p + 3]
    trial, trial_g, trial_d = mats[4 * p + 4], mats[4 * p + 5], mats[4 * p + 6]
    trial_low = mats[4 * p + 7:5 * p + 7]
    r = np.empty(m_points)
    if not evaluate(fid, theta, u, f, jac):
        return NON_FINITE, np.inf, np.nan, 0
    code, rss, offset, slack = check(jac, y, f, sw, p, a, g, d, low, z, pure, n, r)
    lam = 1e-3
    for it in range(max_iterations):
        if code >= 0:
            return code, rss, offset, it
        accepted = False
        while lam < 1e16:
            for j in range(p):
                for k in range(p):
                    m[j, k] = a[j, k]
                m[j, j] += lam
            if not cholesky(m, p, low_m):
                lam *= 10.0
                continue
            forward(low_m, p, g, trial)
            backward(low_m, p, trial, step)
            small = True
            for j in range(p):
                step[j] /= d[j]
                trial[j] = theta[j] + step[j]
                small &= abs(step[j]) <= 4.0 * EPS * abs(theta[j])
            if small:
                break
            if evaluate(fid, trial, u, ftrial, jtrial):
                rt = pure
                for i in range(m_points):
                    e = sw[i] * (y[i] - ftrial[i])
                    rt += e * e
                flat = offset <= FLAT_OFFSET and rt <= rss + slack
                if rt < rss or flat:
                    new = check(jtrial, y, ftrial, sw, p, m, trial_g, trial_d, trial_low, z,
                                pure, n, r)
                    if rt < rss or new[2] < offset:
                        code, rss, offset, slack = new
                        theta[:] = trial
                        a[:, :] = m
                        low[:, :] = trial_low
                        g[:] = trial_g
                        d[:] = trial_d
                        accepted = True
                        lam = max(lam * 0.1, 1e-12)
                        break
                    break                                # a flat step that did not help
            lam *= 10.0
        if not accepted:
            return (RELATIVE_OFFSET if offset <= ACCEPT_OFFSET else STALLED), rss, offset, it
    return LIMIT, rss, offset, max_iterations
