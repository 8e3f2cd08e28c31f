"""Compiled Levenberg-Marquardt for one series of the nonlinear batch, the single fit's stop.

Method: Levenberg-Marquardt on the normal equations of the column-scaled
weighted Jacobian ``Js = sqrt(W) J D^-1`` (``D``: column norms, so the damping
``lambda I`` is Marquardt's scaling), L D L' factors (no square roots) of the small p x p
systems. Convergence is judged at a point with the single fit's criterion,
the Bates & Watts (1981) relative offset
``(||Q1' r|| / sqrt(p)) / (||r - Q1 Q1' r|| / sqrt(n - p))``, where
``||Q1' r||² = g' (Js'Js)^-1 g`` with ``g = Js' r``; the batch asks for
:data:`TARGET_OFFSET`, the single fit's 1e-8 (:mod:`service.core.nonlinear.polish`):
both stop within about 1e-8 standard errors of the same minimum (on the 4PL benchmark
and the tests' series the estimates then agree to 2e-8 standard errors and 1e-8
relative; a target of 1e-10 gave 1.4e-8 and cost 0.4 more iterations per series). When
rounding stops the descent first, the same 1e-8 is accepted; ``small_gradient``
(``||Q1' r||`` at the rounding level of the data) is the same floor as there.
Anything else (a singular Jacobian, a stall, the iteration limit, a
non-finite curve) is reported, and the driver hands the series to the
single-fit engine.
"""

from __future__ import annotations

import math

import numba
import numpy as np

from service.core.batch.curves_linearize import linearize
from service.core.batch.curves_models import has_curvature

TARGET_OFFSET = 1e-8        # the single fit's criterion, met at a linearized point
ACCEPT_OFFSET = 1e-8       # the single fit's criterion (solver.DEFAULT_TOLERANCE)
MAX_ITERATIONS = 200
EPS = float(np.finfo(float).eps)
FLAT_OFFSET = 1e-3         # as polish.FLAT_OFFSET
ACCELERATE_OFFSET = 0.05   # below this relative offset Gauss-Newton's linear rate is steady
NEWTON_OFFSET = 0.05       # below it, with second derivatives, a full Newton step is tried first
PIVOT_FLOOR = 1e-24        # squared scaled pivot: below it the tangent plane is singular
RELATIVE_OFFSET, SMALL_GRADIENT, STALLED, SINGULAR, LIMIT, NON_FINITE = 0, 1, 2, 3, 4, 5
CODES = ("relative_offset", "small_gradient", "stalled", "singular_jacobian", "iteration_limit",
         "non_finite_model")
"""Termination codes (the first two mean converged, as in the single fit)."""


@numba.njit(cache=True, nogil=True, error_model="numpy", inline="always")
def cholesky(a, p, low):
    """``L D L'`` of ``a[:p, :p]`` into ``low`` (unit ``L`` below the diagonal, ``1/D`` on it,
    ``L D`` above; pivots ``D`` floored by :data:`PIVOT_FLOOR`); False if not definite."""
    for j in range(p):
        s = a[j, j]
        for k in range(j):
            s -= low[j, k] * low[k, j]
        if not s > PIVOT_FLOOR:
            return False
        r = 1.0 / s
        low[j, j] = r
        for i in range(j + 1, p):
            t = a[i, j]
            for k in range(j):
                t -= low[i, k] * low[k, j]
            low[j, i] = t
            low[i, j] = t * r
    return True


@numba.njit(cache=True, nogil=True, error_model="numpy", inline="always")
def forward(low, p, b, out):
    """Solve ``L z = b`` (:func:`cholesky`'s factors); returns ``z' D^-1 z``."""
    total = 0.0
    for i in range(p):
        t = b[i]
        for k in range(i):
            t -= low[i, k] * out[k]
        out[i] = t
        total += t * t * low[i, i]
    return total


@numba.njit(cache=True, nogil=True, error_model="numpy", inline="always")
def backward(low, p, z, out):
    """Solve ``D L' x = z`` (after :func:`forward`: ``x = (L D L')^-1 b``)."""
    for i in range(p - 1, -1, -1):
        t = z[i] * low[i, i]
        for k in range(i + 1, p):
            t -= low[k, i] * out[k]
        out[i] = t


@numba.njit(cache=True, nogil=True, error_model="numpy", inline="always")
def check(a, g, d, p, low, z, rss, floor, n):
    """The convergence check at a linearized point: ``(code, offset)``.

    ``code`` is RELATIVE_OFFSET or SMALL_GRADIENT when met, SINGULAR for a singular
    tangent plane (or a zero column), STALLED for a zero residual, else -1 (go on).
    ``low`` receives the ``L D L'`` factors of ``a`` (:func:`cholesky`).
    """
    for j in range(p):
        if not d[j] > 0:
            return SINGULAR, np.nan
    if not cholesky(a, p, low):
        return SINGULAR, np.nan
    proj2 = forward(low, p, g, z)
    orth2 = rss - proj2
    if math.sqrt(proj2) <= floor:
        return SMALL_GRADIENT, (math.sqrt(proj2 / p) / math.sqrt(orth2 / (n - p))
                                if orth2 > 0 else 0.0)
    if not orth2 > 0:
        return STALLED, np.inf
    offset = math.sqrt(proj2 / p) / math.sqrt(orth2 / (n - p))
    return (RELATIVE_OFFSET if offset <= TARGET_OFFSET else -1), offset


@numba.njit(cache=True, nogil=True, error_model="numpy")
def _try(fid, trial, u, y, sw, p, pure, n, rss, offset, slack, trial_a, trial_low, z, trial_g,
         trial_d, trial_c, hess, row, buf):
    """Linearize at ``trial`` (into the trial arrays, views of :func:`solve_family`'s scratch made
    once per solve: views made per call cost two atomic reference counts each) and judge it.

    Returns ``(verdict, code, rss, offset, slack)``: verdict 1 accept, 0 reject (try a
    shorter step), -1 a flat step that did not lower the relative offset (stop).
    """
    ok, rt, floor_t, slack_t = linearize(fid, trial, u, y, sw, p, trial_a, trial_g, trial_d,
                                         row, buf, has_curvature(fid), trial_c, hess)
    rt += pure
    if not ok:
        return 0, -1, rss, offset, slack
    flat = offset <= FLAT_OFFSET and rt <= rss + slack
    if not (rt < rss or flat):
        return 0, -1, rss, offset, slack
    code_t, offset_t = check(trial_a, trial_g, trial_d, p, trial_low, z, rt, floor_t, n)
    if rt < rss or offset_t < offset:
        return 1, code_t, rt, offset_t, slack_t
    return -1, -1, rss, offset, slack


@numba.njit(cache=True, nogil=True, error_model="numpy", inline="always")
def _commit(theta, trial, mats, p):
    """Make the judged trial point the current one (estimates, factor, gradient, norms)."""
    for j in range(p):
        theta[j] = trial[j]
        mats[6 * p, j] = mats[6 * p + 5, j]              # g
        mats[6 * p + 2, j] = mats[6 * p + 6, j]          # d
        for k in range(p):
            mats[p + j, k] = mats[4 * p + j, k]          # a
            mats[j, k] = mats[5 * p + j, k]              # low
            mats[6 * p + 11 + j, k] = mats[7 * p + 11 + j, k]    # curvature term


@numba.njit(cache=True, nogil=True, error_model="numpy", inline="always")
def _newton_step(theta, a, cm, g, d, lam, p, m, low_m, step, trial):
    """The damped Newton point ``theta + D^-1 (Js'Js - C + lambda I)^-1 g`` into ``trial``;
    False when that matrix is not positive definite or the step is at rounding level."""
    for j in range(p):
        for k in range(p):
            m[j, k] = a[j, k] - cm[j, k]
        m[j, j] += lam
    return _step(theta, m, g, d, p, low_m, step, trial) == STEP_TAKEN


STEP_NOT_DEFINITE, STEP_AT_ROUNDING, STEP_TAKEN = 0, 1, 2
"""What :func:`_step` found."""


@numba.njit(cache=True, nogil=True, error_model="numpy", inline="always")
def _step(theta, m, g, d, p, low_m, step, trial):
    """Solve ``m step = g`` (``m`` the damped scaled system), unscale by ``d`` and put
    ``theta + step`` into ``trial``; returns :data:`STEP_NOT_DEFINITE` when ``m`` is not
    positive definite, :data:`STEP_AT_ROUNDING` when every component of the step is at
    rounding level, else :data:`STEP_TAKEN`."""
    if not cholesky(m, p, low_m):
        return STEP_NOT_DEFINITE
    forward(low_m, p, g, trial)
    backward(low_m, p, trial, step)
    small = True
    for j in range(p):
        step[j] /= d[j]
        trial[j] = theta[j] + step[j]
        small &= abs(step[j]) <= 4.0 * EPS * abs(theta[j])
    return STEP_AT_ROUNDING if small else STEP_TAKEN


@numba.njit(cache=True, nogil=True, error_model="numpy")
def scratch_rows(p):
    """Rows of :func:`solve_family`'s scratch ``mats`` (``p`` columns)."""
    return 9 * p + 11


@numba.njit(cache=True, nogil=True, error_model="numpy")
def solve_family(fid, theta, u, y, sw, mats, max_iterations, pure, n):
    """Levenberg-Marquardt from ``theta`` (updated in place) to the stop.

    The data may be pooled by distinct x (replicates): ``y`` the weighted mean response
    at each ``u``, ``sw`` the square roots of the summed weights, ``pure`` the weighted
    scatter about those means (the pure-error sum of squares, a constant part of the
    RSS) and ``n`` the number of points; the RSS, gradient and relative offset are those
    of the points, at a third of the work for triplicates.

    ``mats`` is scratch of shape ``(scratch_rows(p), p)``; on a converged return
    :func:`factor_and_norms` makes the Cholesky factor of the scaled ``Js'Js`` at
    ``theta`` and the column norms ``D`` from it.

    A step is accepted when it lowers the RSS; once the relative offset is below
    ``FLAT_OFFSET``, where the RSS is flat to first order and float64 cannot confirm
    a step, also when the RSS stays within its rounding slack and the relative
    offset falls (as the single fit's polish does). Gauss-Newton converges linearly on
    noisy data. For a family with second derivatives (logistic4), below
    :data:`NEWTON_OFFSET` each iteration first tries the Newton step of the full Hessian
    ``Js'Js - D^-1 (sum w r H) D^-1`` (damped by the current lambda; converges
    quadratically), judged by the same rules; when it fails, and for the other families
    below :data:`ACCELERATE_OFFSET`, the step extrapolated from the last two (Anderson
    acceleration of depth one, in the scaled parameters) is tried, then the plain step.
    The stop is the same relative offset whichever step led there.

    Returns
    -------
    code : int (:data:`CODES`), rss : float, offset : float, iterations : int
    """
    p = theta.size
    low, a, m, low_m = mats[0:p], mats[p:2 * p], mats[2 * p:3 * p], mats[3 * p:4 * p]
    g, z, d, step = mats[6 * p], mats[6 * p + 1], mats[6 * p + 2], mats[6 * p + 3]
    trial, row = mats[6 * p + 4], mats[6 * p + 7]
    prev_theta, prev_step, extra = mats[6 * p + 8], mats[6 * p + 9], mats[6 * p + 10]
    cm, hess = mats[6 * p + 11:7 * p + 11], mats[8 * p + 11:9 * p + 11]
    trial_a, trial_low = mats[4 * p:5 * p], mats[5 * p:6 * p]
    trial_g, trial_d, trial_c = mats[6 * p + 5], mats[6 * p + 6], mats[7 * p + 11:8 * p + 11]
    newton = has_curvature(fid)
    buf = np.empty(y.size)
    ok, rss, floor, slack = linearize(fid, theta, u, y, sw, p, a, g, d, row, buf, newton, cm,
                                      hess)
    if not ok:
        return NON_FINITE, np.inf, np.nan, 0
    rss += pure
    code, offset = check(a, g, d, p, low, z, rss, floor, n)
    lam = 1e-3
    have_prev = False
    for it in range(max_iterations):
        if code >= 0:
            return code, rss, offset, it
        if newton and offset <= NEWTON_OFFSET and _newton_step(theta, a, cm, g, d, lam, p,
                                                                m, low_m, step, extra):
            verdict, c, r, o, sl = _try(fid, extra, u, y, sw, p, pure, n, rss, offset, slack,
                                        trial_a, trial_low, z, trial_g, trial_d, trial_c, hess,
                                        row, buf)
            if verdict == 1:
                have_prev = False
                _commit(theta, extra, mats, p)
                code, rss, offset, slack = c, r, o, sl
                lam = max(lam * 0.1, 1e-12)
                continue
        accepted = False
        while lam < 1e16:
            for j in range(p):
                for k in range(p):
                    m[j, k] = a[j, k]
                m[j, j] += lam
            outcome = _step(theta, m, g, d, p, low_m, step, trial)
            if outcome == STEP_NOT_DEFINITE:
                lam *= 10.0
                continue
            if outcome == STEP_AT_ROUNDING:
                break
            if have_prev and offset <= ACCELERATE_OFFSET:
                num = den = 0.0
                for j in range(p):
                    ds = (step[j] - prev_step[j]) * d[j]
                    num += ds * step[j] * d[j]
                    den += ds * ds
                if den > 0:
                    gamma = num / den
                    for j in range(p):
                        extra[j] = trial[j] - gamma * (theta[j] - prev_theta[j] + step[j]
                                                       - prev_step[j])
                    verdict, c, r, o, sl = _try(fid, extra, u, y, sw, p, pure, n, rss, offset,
                                                slack, trial_a, trial_low, z, trial_g, trial_d,
                                                trial_c, hess, row, buf)
                    if verdict == 1:
                        for j in range(p):
                            prev_theta[j], prev_step[j] = theta[j], step[j]
                        _commit(theta, extra, mats, p)
                        code, rss, offset, slack = c, r, o, sl
                        accepted = True
                        lam = max(lam * 0.1, 1e-12)
                        break
            verdict, c, r, o, sl = _try(fid, trial, u, y, sw, p, pure, n, rss, offset, slack,
                                        trial_a, trial_low, z, trial_g, trial_d, trial_c, hess,
                                        row, buf)
            if verdict == 1:
                for j in range(p):
                    prev_theta[j], prev_step[j] = theta[j], step[j]
                have_prev = True
                _commit(theta, trial, mats, p)
                code, rss, offset, slack = c, r, o, sl
                accepted = True
                lam = max(lam * 0.1, 1e-12)
                break
            if verdict < 0:
                break                                # a flat step that did not help
            lam *= 10.0
        if not accepted:
            return (RELATIVE_OFFSET if offset <= ACCEPT_OFFSET else STALLED), rss, offset, it
    return LIMIT, rss, offset, max_iterations


@numba.njit(cache=True, nogil=True, error_model="numpy")
def factor_and_norms(mats, p):
    """The Cholesky factor ``L sqrt(D)`` of the scaled ``Js'Js`` (made in place, once per
    solve, from the factors :func:`solve_family` and :func:`.curves_solver4.solve4`
    leave in the scratch) and the column norms ``D``."""
    low = mats[0:p]
    for j in range(p):
        root = 1.0 / math.sqrt(low[j, j])
        low[j, j] = root
        for i in range(j + 1, p):
            low[i, j] *= root
    return low, mats[6 * p + 2]
