"""The nonlinear batch solver for logistic4, its state held in registers.

The same Levenberg-Marquardt with Newton steps as
:func:`.curves_solver.solve_family` (the same steps, tests and stop, operation for
operation), written for the two logistic4 families alone: the scaled normal matrix,
its ``L D L'`` factors and the curvature term are tuples of scalars rather than rows
of a scratch array, formed in one pass over the points by
:func:`.curves_linearize4.linearize4`. No array view is made and no array is allocated per
call (each view or call with arrays costs atomic reference counts); the final factor
and column norms are written to the scratch rows :func:`.curves_solver.factor_and_norms`
reads.
"""

from __future__ import annotations

import math

import numba
import numpy as np

from service.core.batch.curves_linearize4 import FAIL as _FAIL
from service.core.batch.curves_linearize4 import linearize4 as _linearize
from service.core.batch.curves_linearize4 import linearize4_inline as _pass
from service.core.batch.curves_models import L4_LOG, has_curvature
from service.core.batch.curves_solver import (
    ACCELERATE_OFFSET,
    ACCEPT_OFFSET,
    EPS,
    FLAT_OFFSET,
    LIMIT,
    NEWTON_OFFSET,
    NON_FINITE,
    PIVOT_FLOOR,
    RELATIVE_OFFSET,
    SINGULAR,
    SMALL_GRADIENT,
    STALLED,
    TARGET_OFFSET,
    solve_family,
)


@numba.njit(cache=True, nogil=True, error_model="numpy", inline="always")
def _cholesky(a):
    """``L D L'`` factors of the lower triangle ``a`` (no square roots): the unit lower
    ``L`` row by row with the reciprocals of ``D`` on its diagonal (a tuple laid out
    as :func:`.curves_solver.cholesky`'s factor; the pivots ``D`` are that factor's
    squared diagonal, held to the same floor); ``(False, ...)`` when not positive
    definite. Each column costs one division on the dependency chain where the
    Cholesky factor costs a square root and a division."""
    a00, a10, a11, a20, a21, a22, a30, a31, a32, a33 = a
    if not a00 > PIVOT_FLOOR:
        return False, _FAIL
    r0 = 1.0 / a00
    l10, l20, l30 = a10 * r0, a20 * r0, a30 * r0
    d1 = a11 - l10 * a10
    if not d1 > PIVOT_FLOOR:
        return False, _FAIL
    r1 = 1.0 / d1
    u21, u31 = a21 - l20 * a10, a31 - l30 * a10
    l21, l31 = u21 * r1, u31 * r1
    d2 = a22 - l20 * a20 - l21 * u21
    if not d2 > PIVOT_FLOOR:
        return False, _FAIL
    r2 = 1.0 / d2
    u32 = a32 - l30 * a20 - l31 * u21
    l32 = u32 * r2
    d3 = a33 - l30 * a30 - l31 * u31 - l32 * u32
    if not d3 > PIVOT_FLOOR:
        return False, _FAIL
    return True, (r0, l10, r1, l20, l21, r2, l30, l31, l32, 1.0 / d3)


@numba.njit(cache=True, nogil=True, error_model="numpy", inline="always")
def _forward(low, b):
    """Solve ``L z = b`` for the factors of :func:`_cholesky`: ``(z, z' D^-1 z)`` (the
    squared norm of the Cholesky factor's forward solve)."""
    r0, l10, r1, l20, l21, r2, l30, l31, l32, r3 = low
    z0 = b[0]
    z1 = b[1] - l10 * z0
    z2 = b[2] - l20 * z0 - l21 * z1
    z3 = b[3] - l30 * z0 - l31 * z1 - l32 * z2
    return (z0, z1, z2, z3), z0 * z0 * r0 + z1 * z1 * r1 + z2 * z2 * r2 + z3 * z3 * r3


@numba.njit(cache=True, nogil=True, error_model="numpy", inline="always")
def _backward(low, z):
    """Solve ``D L' x = z`` (after :func:`_forward`: ``x = (L D L')^-1 b``)."""
    r0, l10, r1, l20, l21, r2, l30, l31, l32, r3 = low
    x3 = z[3] * r3
    x2 = z[2] * r2 - l32 * x3
    x1 = z[1] * r1 - l21 * x2 - l31 * x3
    x0 = z[0] * r0 - l10 * x1 - l20 * x2 - l30 * x3
    return x0, x1, x2, x3


@numba.njit(cache=True, nogil=True, error_model="numpy", inline="always")
def _check(a, g, d, rss, floor, n):
    """:func:`.curves_solver.check`: ``(code, offset, low)``."""
    if not (d[0] > 0 and d[1] > 0 and d[2] > 0 and d[3] > 0):
        return SINGULAR, np.nan, _FAIL
    ok, low = _cholesky(a)
    if not ok:
        return SINGULAR, np.nan, _FAIL
    _, proj2 = _forward(low, g)
    orth2 = rss - proj2
    if math.sqrt(proj2) <= floor:
        return SMALL_GRADIENT, (math.sqrt(proj2 / 4) / math.sqrt(orth2 / (n - 4))
                                if orth2 > 0 else 0.0), low
    if not orth2 > 0:
        return STALLED, np.inf, low
    offset = math.sqrt(proj2 / 4) / math.sqrt(orth2 / (n - 4))
    return (RELATIVE_OFFSET if offset <= TARGET_OFFSET else -1), offset, low


@numba.njit(cache=True, nogil=True, error_model="numpy", inline="always")
def _step(t, m, g, d):
    """:func:`.curves_solver._step` on the damped lower triangle ``m``:
    ``(outcome, step, trial)``, outcome 0 not definite, 1 at rounding, 2 taken."""
    ok, low = _cholesky(m)
    if not ok:
        return 0, _FAIL[:4], _FAIL[:4]
    z, _ = _forward(low, g)
    s = _backward(low, z)
    s0, s1, s2, s3 = s[0] / d[0], s[1] / d[1], s[2] / d[2], s[3] / d[3]
    small = (abs(s0) <= 4.0 * EPS * abs(t[0]) and abs(s1) <= 4.0 * EPS * abs(t[1])
             and abs(s2) <= 4.0 * EPS * abs(t[2]) and abs(s3) <= 4.0 * EPS * abs(t[3]))
    trial = (t[0] + s0, t[1] + s1, t[2] + s2, t[3] + s3)
    return (1 if small else 2), (s0, s1, s2, s3), trial


@numba.njit(cache=True, nogil=True, error_model="numpy", inline="always")
def _damped(a, lam, cm, newton):
    """``a + lam I`` (``a - cm + lam I`` with ``newton``), lower triangles."""
    if newton:
        a = (a[0] - cm[0], a[1] - cm[1], a[2] - cm[2], a[3] - cm[3], a[4] - cm[4],
             a[5] - cm[5], a[6] - cm[6], a[7] - cm[7], a[8] - cm[8], a[9] - cm[9])
    return (a[0] + lam, a[1], a[2] + lam, a[3], a[4], a[5] + lam, a[6], a[7], a[8],
            a[9] + lam)


@numba.njit(cache=True, nogil=True, error_model="numpy", inline="always")
def _try(passed, n, rss, offset, slack):
    """:func:`.curves_solver._try` on ``passed``, the pass over the points at the trial
    (:func:`.curves_linearize4.linearize4`): ``(verdict, code, rss, offset, slack,
    floor-free state)`` with the trial point's ``(a, g, d, cm, low)`` when accepted
    (verdict 1)."""
    ok, rt, floor_t, slack_t, a, g, d, cm = passed
    if not ok:
        return 0, -1, rss, offset, slack, a, g, d, cm, _FAIL
    flat = offset <= FLAT_OFFSET and rt <= rss + slack
    if not (rt < rss or flat):
        return 0, -1, rss, offset, slack, a, g, d, cm, _FAIL
    code_t, offset_t, low = _check(a, g, d, rt, floor_t, n)
    if rt < rss or offset_t < offset:
        return 1, code_t, rt, offset_t, slack_t, a, g, d, cm, low
    return -1, -1, rss, offset, slack, a, g, d, cm, low


@numba.njit(cache=True, nogil=True, error_model="numpy")
def solve4(fid, theta, u, y, sw, mats, max_iterations, pure, n, fj):
    """:func:`.curves_solver.solve_family` for logistic4 (``fid`` L4_LOG or L4_LINEAR):
    the same arguments (and ``fj``, scratch of 5 values per point), steps and stop; on
    return the ``L D L'`` factors of the scaled ``Js'Js`` at ``theta`` and the column
    norms are in ``mats`` where :func:`.curves_solver.factor_and_norms` finds them.

    Returns ``(code, rss, offset, iterations, fresh)``: ``fresh`` True when ``fj`` holds
    the curve and its gradient at the returned ``theta`` (the last pass over the points
    was there: every stop met at a point, not after a rejected trial).
    """
    log_x = fid == L4_LOG
    t = (theta[0], theta[1], theta[2], theta[3])
    ok, rss, floor, slack, a, g, d, cm = _linearize(log_x, t, u, y, sw, pure, fj)
    if not ok:
        return NON_FINITE, np.inf, np.nan, 0, False
    code, offset, low = _check(a, g, d, rss, floor, n)
    fresh = True
    lam = 1e-3
    have_prev = False
    prev_t = prev_s = (0.0, 0.0, 0.0, 0.0)
    iterations, finished = max_iterations, False
    for it in range(max_iterations):
        if code >= 0:
            iterations, finished = it, True
            break
        fresh = False
        if offset <= NEWTON_OFFSET:
            outcome, _, extra = _step(t, _damped(a, lam, cm, True), g, d)
            if outcome == 2:
                verdict, c, r, o, sl, a2, g2, d2, cm2, low2 = _try(
                    _pass(log_x, extra, u, y, sw, pure, fj), n, rss, offset, slack)
                if verdict == 1:
                    fresh = True
                    have_prev = False
                    t, a, g, d, cm, low = extra, a2, g2, d2, cm2, low2
                    code, rss, offset, slack = c, r, o, sl
                    lam = max(lam * 0.1, 1e-12)
                    continue
        accepted = False
        while lam < 1e16:
            outcome, s, trial = _step(t, _damped(a, lam, cm, False), g, d)
            if outcome == 0:
                lam *= 10.0
                continue
            if outcome == 1:
                break
            if have_prev and offset <= ACCELERATE_OFFSET:
                num = den = 0.0
                for j in range(4):
                    ds = (s[j] - prev_s[j]) * d[j]
                    num += ds * s[j] * d[j]
                    den += ds * ds
                if den > 0:
                    gamma = num / den
                    extra = (trial[0] - gamma * (t[0] - prev_t[0] + s[0] - prev_s[0]),
                             trial[1] - gamma * (t[1] - prev_t[1] + s[1] - prev_s[1]),
                             trial[2] - gamma * (t[2] - prev_t[2] + s[2] - prev_s[2]),
                             trial[3] - gamma * (t[3] - prev_t[3] + s[3] - prev_s[3]))
                    verdict, c, r, o, sl, a2, g2, d2, cm2, low2 = _try(     # (rare: a call)
                        _linearize(log_x, extra, u, y, sw, pure, fj), n, rss, offset, slack)
                    if verdict == 1:
                        fresh = True
                        prev_t, prev_s = t, s
                        t, a, g, d, cm, low = extra, a2, g2, d2, cm2, low2
                        code, rss, offset, slack = c, r, o, sl
                        accepted = True
                        lam = max(lam * 0.1, 1e-12)
                        break
            verdict, c, r, o, sl, a2, g2, d2, cm2, low2 = _try(
                _pass(log_x, trial, u, y, sw, pure, fj), n, rss, offset, slack)
            if verdict == 1:
                fresh = True
                prev_t, prev_s = t, s
                have_prev = True
                t, a, g, d, cm, low = trial, a2, g2, d2, cm2, low2
                code, rss, offset, slack = c, r, o, sl
                accepted = True
                lam = max(lam * 0.1, 1e-12)
                break
            if verdict < 0:
                break                                # a flat step that did not help
            lam *= 10.0
        if not accepted:
            code = RELATIVE_OFFSET if offset <= ACCEPT_OFFSET else STALLED
            iterations, finished = it, True
            break
    if not finished:
        code = LIMIT
    for j in range(4):
        theta[j] = t[j]
    _store(mats, low, d)
    return code, rss, offset, iterations, fresh


@numba.njit(cache=True, nogil=True, error_model="numpy", inline="always")
def _store(mats, low, d):
    """The ``L D L'`` factors and the column norms where
    :func:`.curves_solver.factor_and_norms` reads them (rows 0..3 and row 26 of the
    scratch for p = 4)."""
    mats[0, 0] = low[0]
    mats[1, 0], mats[1, 1] = low[1], low[2]
    mats[2, 0], mats[2, 1], mats[2, 2] = low[3], low[4], low[5]
    mats[3, 0], mats[3, 1], mats[3, 2], mats[3, 3] = low[6], low[7], low[8], low[9]
    for j in range(4):
        mats[26, j] = d[j]


@numba.njit(cache=True, nogil=True, error_model="numpy")
def solve(fid, theta, u, y, sw, mats, max_iterations, pure, n, fj):
    """Levenberg-Marquardt from ``theta`` (updated in place) to the stop:
    :func:`solve4` for logistic4, :func:`.curves_solver.solve_family` for the others
    (``fresh`` always False: ``fj`` is not written)."""
    if has_curvature(fid):
        return solve4(fid, theta, u, y, sw, mats, max_iterations, pure, n, fj)
    code, rss, offset, iterations = solve_family(fid, theta, u, y, sw, mats, max_iterations,
                                                 pure, n)
    return code, rss, offset, iterations, False
