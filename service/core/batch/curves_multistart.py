"""Compiled multi-start of the nonlinear batch: logistic5 and biexponential.

These two families' least-squares surfaces often have several minima (logistic5: the
asymmetry at either end of the curve, both signs of the slope; biexponential: the split
into two phases), so the batch solves from every start the single fit solves from
(:func:`service.core.nonlinear.builtin.starts.automatic_starts`) and keeps what it keeps
(:func:`service.core.nonlinear.builtin.fit.best_fit`):

* the **grid**: the family's variable-projection grid with the single fit's axes
  (logistic5: signed slope x ec50 x asymmetry, only slope > 0 when some x is 0 on the log
  scale; biexponential: both rates over the same range), its best point and its next
  local minima (a point no higher than any of its neighbours, ``scipy.ndimage``'s
  3-wide minimum filter with edge replication), at most :data:`COUNT`, of distinct RSS
  (1e-9 relative) -- evaluated on the pooled data (the RSS of the points less the
  pure-error sum of squares, a constant);
* the **shape start** (logistic4's readings with asymmetry 1; biexponential's curve
  peeling), solved second;
* order grid best, shape, other minima; a start repeating an earlier one is dropped.

Every start is solved (:func:`.curves_solver4.solve`); the kept fit is the first
converged one of the lowest RSS (an RSS lower by 1e-9 relative replaces it). The series
goes to the single fit whenever the single fit could keep another fit: when a start did
not converge here (the single fit's solver, another method with restarts, may converge
from it elsewhere, or report ``lower_rss_not_converged``), when a logistic5 start ended
at an asymmetry <= 0 (outside the family), and when a logistic5 grid start at asymmetry 1
would change the kept fit if it were replaced by its mirror (the same curve, so which one
of the two the single fit's grid keeps is a matter of rounding).
"""

from __future__ import annotations

import math

import numba
import numpy as np

from service.core.batch.curves_models import L4_LINEAR, L4_LOG
from service.core.batch.curves_models_extra import BIEXPONENTIAL, L5_LOG
from service.core.batch.curves_solver import SMALL_GRADIENT
from service.core.batch.curves_solver4 import solve
from service.core.batch.curves_starts import _line, project, shape_start

STEEPNESS = np.geomspace(0.5, 100.0, 10)               # as builtin.dose_response
MID_POINTS = 17
ASYMMETRY = np.array([0.1, 0.25, 0.5, 1.0, 2.0, 4.0, 10.0])
TWO_RATES = np.geomspace(0.02, 100.0, 26)              # as builtin.decay
COUNT = 4                                              # grid starts, as automatic_starts
SAME_RSS = 1e-9                                        # as builtin.fit.SAME_RSS
RANK_RTOL = 1e-10                                      # as builtin.starts.RANK_RTOL
MAX_STARTS = COUNT + 1
SHAPE = 0      # start codes: 0 shape, 1 grid best, k grid_local_k


@numba.njit(cache=True, nogil=True, error_model="numpy")
def is_multistart(fid):
    """True for the families fitted from every automatic start (logistic5, biexponential)."""
    return fid >= L5_LOG


@numba.njit(cache=True, nogil=True, error_model="numpy", inline="always")
def _rss2(c1, c2, y, sw, k):
    """Weighted RSS of the least-squares fit of ``y`` on two columns (as
    :func:`.curves_starts.project`); inf when not finite or singular."""
    a11 = a12 = a22 = b1 = b2 = 0.0
    for i in range(k):
        p1, p2, t = sw[i] * c1[i], sw[i] * c2[i], sw[i] * y[i]
        a11 += p1 * p1
        a12 += p1 * p2
        a22 += p2 * p2
        b1 += p1 * t
        b2 += p2 * t
    if not (a11 > 0 and a22 > 0):
        return np.inf
    r22 = a22 - a12 * a12 / a11
    if not r22 > (RANK_RTOL * RANK_RTOL) * a22:
        return np.inf
    beta2 = (b2 - a12 * b1 / a11) / r22
    beta1 = (b1 - a12 * beta2) / a11
    rss = 0.0
    for i in range(k):
        e = y[i] - beta1 * c1[i] - beta2 * c2[i]
        rss += sw[i] * sw[i] * e * e
    return rss if math.isfinite(rss) else np.inf


@numba.njit(cache=True, nogil=True, error_model="numpy")
def _grid(fid, u, y, sw, k, axes, shape):
    """The grid's RSS (flat, meshgrid "ij" order) and its axes (rows of ``axes``, their
    lengths into ``shape``)."""
    lo, hi = np.inf, -np.inf
    zero = False
    for i in range(k):
        if math.isfinite(u[i]):
            lo, hi = min(lo, u[i]), max(hi, u[i])
        zero |= u[i] == -np.inf
    span = (hi - lo) if hi > lo else 1.0
    c1, c2 = np.empty(k), np.empty(k)
    if fid == BIEXPONENTIAL:
        nr = TWO_RATES.size
        shape[0], shape[1], shape[2] = nr, nr, 1
        e = np.empty((nr, k))
        for a in range(nr):
            axes[0, a] = axes[1, a] = TWO_RATES[a] / span
            for i in range(k):
                e[a, i] = math.exp(-axes[0, a] * u[i])
        rss = np.empty(nr * nr)
        for a in range(nr):
            for b in range(nr):
                rss[a * nr + b] = _rss2(e[a], e[b], y, sw, k)
        return rss
    ns = STEEPNESS.size
    signed = not (fid == L5_LOG and zero)          # x = 0 on log x: only slope > 0 is finite
    na = 2 * ns if signed else ns
    for a in range(na):
        if signed:
            axes[0, a] = (STEEPNESS[a - ns] if a >= ns else -STEEPNESS[ns - 1 - a]) / span
        else:
            axes[0, a] = STEEPNESS[a] / span
    for b in range(MID_POINTS):
        mid = lo - 0.25 * span + (1.5 * span) * b / (MID_POINTS - 1)
        axes[1, b] = math.exp(mid) if fid == L5_LOG else mid
    for c in range(ASYMMETRY.size):
        axes[2, c] = ASYMMETRY[c]
    shape[0], shape[1], shape[2] = na, MID_POINTS, ASYMMETRY.size
    rss = np.empty(na * MID_POINTS * ASYMMETRY.size)
    z = np.empty(k)
    at = 0
    for a in range(na):
        for b in range(MID_POINTS):
            centre = math.log(axes[1, b]) if fid == L5_LOG else axes[1, b]
            for i in range(k):
                z[i] = math.exp(axes[0, a] * (u[i] - centre))
            for c in range(ASYMMETRY.size):
                g = ASYMMETRY[c]
                cc = 2.0 ** (1.0 / g) - 1.0
                for i in range(k):
                    c1[i] = (1.0 + cc * z[i]) ** (-g)
                    c2[i] = 1.0 - c1[i]
                rss[at] = _rss2(c1, c2, y, sw, k)
                at += 1
    return rss


@numba.njit(cache=True, nogil=True, error_model="numpy")
def grid_starts(fid, u, y, sw, k, pure, starts, mirrors):
    """The grid's best point and next local minima of distinct RSS (nonlinear values into
    the rows of ``starts``); returns how many (at most :data:`COUNT`).

    A logistic5 start at asymmetry 1 is the same curve as its mirror (slope negated, the
    ends swapped), so which of the two the grid keeps is a matter of rounding: the
    mirror's nonlinear values go to the same row of ``mirrors`` (NaN slope: none)."""
    axes = np.empty((3, 2 * STEEPNESS.size + TWO_RATES.size))
    shape = np.empty(3, dtype=np.int64)
    rss = _grid(fid, u, y, sw, k, axes, shape)
    for i in range(rss.size):
        rss[i] += pure
    n0, n1, n2 = shape[0], shape[1], shape[2]
    minima = np.empty(rss.size, dtype=np.int64)
    count = 0
    for i0 in range(n0):
        for i1 in range(n1):
            for i2 in range(n2):
                at = (i0 * n1 + i1) * n2 + i2
                value = rss[at]
                if not math.isfinite(value):
                    continue
                low = True
                for j0 in range(max(i0 - 1, 0), min(i0 + 2, n0)):
                    for j1 in range(max(i1 - 1, 0), min(i1 + 2, n1)):
                        for j2 in range(max(i2 - 1, 0), min(i2 + 2, n2)):
                            low &= value <= rss[(j0 * n1 + j1) * n2 + j2]
                if low:
                    minima[count] = at
                    count += 1
    values = np.empty(count)
    for j in range(count):
        values[j] = rss[minima[j]]
    order = np.argsort(values, kind="mergesort")
    seen = np.empty(COUNT)
    found = 0
    for j in order:
        value = values[j]
        if any_close(value, seen, found):
            continue
        seen[found] = value
        at = minima[j]
        i2 = at % n2
        i1 = (at // n2) % n1
        i0 = at // (n1 * n2)
        starts[found, 0], starts[found, 1] = axes[0, i0], axes[1, i1]
        mirrors[found, 0] = np.nan
        if fid != BIEXPONENTIAL:
            starts[found, 2] = axes[2, i2]
            if axes[2, i2] == 1.0 and axes[0, 0] < 0:
                mirrors[found, 0], mirrors[found, 1] = axes[0, n0 - 1 - i0], axes[1, i1]
                mirrors[found, 2] = 1.0
        found += 1
        if found == COUNT:
            break
    return found


@numba.njit(cache=True, nogil=True, error_model="numpy", inline="always")
def any_close(value, seen, count):
    """True when ``value`` is within 1e-9 relative of one of ``seen[:count]`` (numpy.isclose)."""
    for j in range(count):
        if abs(value - seen[j]) <= 1e-9 * abs(seen[j]):
            return True
    return False


@numba.njit(cache=True, nogil=True, error_model="numpy")
def peel(u, y, out, v):
    """Biexponential shape start (curve peeling, as the single fit's): the slow rate from
    the line of log |y| on x over the late half, the fast one from what is left early;
    into ``out`` (k_fast, k_slow); False when there is none."""
    n = u.size
    median = np.median(u)
    total, count = 0.0, 0
    for i in range(n):
        if u[i] >= median:
            total += y[i]
            count += 1
    sign = 1.0 if total / count >= 0 else -1.0
    for i in range(n):
        v[i] = math.log(sign * y[i]) if u[i] >= median and sign * y[i] > 0 else np.nan
    a_slow, b_slow = _line(u, v)
    if not (math.isfinite(a_slow) and math.isfinite(b_slow)):
        return False
    total, count = 0.0, 0
    for i in range(n):
        if u[i] < median:
            total += y[i] - sign * math.exp(a_slow + b_slow * u[i])
            count += 1
    sign2 = 1.0 if count > 0 and total / count >= 0 else -1.0
    for i in range(n):
        rest = y[i] - sign * math.exp(a_slow + b_slow * u[i])
        v[i] = math.log(sign2 * rest) if u[i] < median and sign2 * rest > 0 else np.nan
    a_fast, b_fast = _line(u, v)
    if not (math.isfinite(a_fast) and math.isfinite(b_fast)) or not -b_fast > -b_slow:
        return False
    out[0], out[1] = -b_fast, -b_slow
    return True


@numba.njit(cache=True, nogil=True, error_model="numpy", inline="always")
def _solve_from(fid, nl, pooled, n, cols, coef, theta, mats, fj, work):
    """Linear parameters at ``nl``, then solve on the pooled data (as
    :func:`.curves_kernel._attempt`). Returns ``(started, code, rss, offset, iterations)``;
    ``started`` False when the curve is not finite at ``nl`` (not a start)."""
    ul, yl, swl, pure, k = pooled
    lin = cols.shape[0]
    if project(fid, nl, ul[:k], yl[:k], swl[:k], cols[:, :k], coef, work) == np.inf:
        return False, -1, np.inf, np.nan, 0
    for j in range(lin):
        theta[j] = coef[j]
    for j in range(theta.size - lin):
        theta[lin + j] = nl[j]
    c, rss, off, iters, _ = solve(fid, theta, ul[:k], yl[:k], swl[:k], mats, 200, pure, n, fj)
    if fid != BIEXPONENTIAL and not theta[theta.size - 1] > 0:
        c = -1                          # asymmetry <= 0: outside the family
    return True, c, rss, off, iters


@numba.njit(cache=True, nogil=True, error_model="numpy")
def solve_starts(fid, x, u, y, lev, means, m, v, pooled, n, cols, coef, theta, best, mats,
                 fj, work):
    """Solve from every start; the kept estimates into ``best``.

    Returns ``(found, rss, start, iterations, current, code, offset, unsure)``: ``start``
    the kept start's code (0 shape, 1 grid best, j grid_local_j), ``current`` True when
    the solver's scratch holds the kept fit (it was solved last), ``unsure`` True when the
    single fit may keep another fit: a start did not converge here (or ended at an
    asymmetry <= 0, outside the family), or the mirror of a start would change the kept fit.
    """
    ul, yl, swl, pure, k = pooled
    p = theta.size
    free = p - cols.shape[0]
    grid, mirrors = np.empty((COUNT, 3)), np.empty((COUNT, 3))
    starts = np.empty((MAX_STARTS, 3))
    tags = np.empty(MAX_STARTS, dtype=np.int64)
    found_grid = grid_starts(fid, ul[:k], yl[:k], swl[:k], k, pure, grid, mirrors)
    nl = np.empty(3)
    if fid == BIEXPONENTIAL:
        has_shape = peel(u, y, nl, v)
    else:
        has_shape = shape_start(L4_LOG if fid == L5_LOG else L4_LINEAR, x, u, y, lev, means,
                                m, nl, v)
        nl[2] = 1.0
    total = 0
    for j in range(found_grid + 1):
        if j == 1:
            if not has_shape:
                continue
            candidate, tag = nl, SHAPE
        else:
            at = 0 if j == 0 else j - 1
            if at >= found_grid:
                continue
            candidate, tag = grid[at], at + 1
        repeat = False
        for t in range(total):          # a start equal to an earlier one (1e-9 relative)
            same = True
            for q in range(free):
                same &= abs(candidate[q] - starts[t, q]) <= 1e-9 * abs(starts[t, q])
            repeat |= same
        if repeat:
            continue
        starts[total, :] = candidate
        tags[total] = tag
        total += 1
    found, unsure = False, False
    best_rss, start, spent, last = np.inf, -1, 0, -1
    code, offset, current = -1, np.nan, False
    outcome = np.full(MAX_STARTS, np.nan)      # RSS of each converged start (NaN: failed)
    for t in range(total):
        started, c, rss, off, iters = _solve_from(fid, starts[t], pooled, n, cols, coef, theta,
                                                  mats, fj, work)
        spent += iters
        if not started:
            continue
        if not 0 <= c <= SMALL_GRADIENT:
            unsure = True
            continue
        outcome[t] = rss
        if not found or rss < best_rss * (1.0 - SAME_RSS):
            found, best_rss, start, last, code, offset = True, rss, tags[t], t, c, off
            best[:] = theta
        current = last == t
    for t in range(total):              # logistic5 at asymmetry 1: the mirror as well
        at = tags[t] - 1
        if unsure or at < 0 or mirrors[at, 0] != mirrors[at, 0]:
            continue
        started, c, rss, off, iters = _solve_from(fid, mirrors[at], pooled, n, cols, coef,
                                                  theta, mats, fj, work)
        spent += iters
        current = False
        if not started:
            continue
        if not 0 <= c <= SMALL_GRADIENT:
            unsure = True
            continue
        other = rss                     # the lowest RSS had the grid kept the mirror
        for s in range(total):
            if s != t and outcome[s] == outcome[s]:
                other = min(other, outcome[s])
        unsure |= abs(other - best_rss) > SAME_RSS * best_rss
    return found, best_rss, start, spent, current, code, offset, unsure
