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
goes to the single fit when no start converged here, and when a logistic5 grid start at
asymmetry 1 would change the kept fit if it were replaced by its mirror (the same curve,
so which one of the two the single fit's grid keeps is a matter of rounding). When a
start did not converge here (or a logistic5 start ended at an asymmetry <= 0, outside the
family), the single fit's solver (another method with restarts) may still converge from
it elsewhere, or report ``lower_rss_not_converged``: the series is fitted here all the
same, with a provisional status naming those starts (:func:`provisional`), and the
caller re-solves just them with the single fit's solver (:mod:`.curves_resolve`).
"""

from __future__ import annotations

import numba
import numpy as np

from service.core.batch.curves_models import L4_LINEAR, L4_LOG
from service.core.batch.curves_models_extra import BIEXPONENTIAL, L5_LOG
from service.core.batch.curves_multistart_grid import COUNT, grid_starts, peel
from service.core.batch.curves_solver import SMALL_GRADIENT
from service.core.batch.curves_solver4 import solve
from service.core.batch.curves_starts import project, shape_start

SAME_RSS = 1e-9                                        # as builtin.fit.SAME_RSS
MAX_STARTS = COUNT + 1
MASK_BITS = MAX_STARTS                  # a bit per start in a provisional status
SHAPE = 0      # start codes: 0 shape, 1 grid best, k grid_local_k


@numba.njit(cache=True, nogil=True, error_model="numpy")
def is_multistart(fid):
    """True for the families fitted from every automatic start (logistic5, biexponential)."""
    return fid >= L5_LOG


@numba.njit(cache=True, nogil=True, error_model="numpy", inline="always")
def attempt(fid, nl, n, pooled, cols, coef, theta, mats, fj, work):
    """Linear parameters at ``nl``, then solve, both on the pooled data (``pooled``:
    distinct u, mean y, sqrt summed weights, pure-error SS, m; the linear least squares
    of the points and of their pools have the same solution); ``n`` points.
    Returns (converged, rss, offset, iters, code, fresh) (``fresh``: as
    :func:`.curves_solver4.solve`). Used by :mod:`.curves_kernel` for the one-start families."""
    lin = cols.shape[0]
    ul, yl, swl, pure, m = pooled
    if project(fid, nl, ul[:m], yl[:m], swl[:m], cols[:, :m], coef, work) == np.inf:
        return False, np.inf, np.nan, 0, -1, False
    for j in range(lin):
        theta[j] = coef[j]
    for j in range(theta.size - lin):
        theta[lin + j] = nl[j]
    code, rss, offset, iters, fresh = solve(fid, theta, ul[:m], yl[:m], swl[:m], mats, 200,
                                            pure, n, fj)
    return code <= SMALL_GRADIENT, rss, offset, iters, code, fresh


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

    Returns ``(found, rss, start, iterations, current, code, offset, unsure, status)``:
    ``start`` the kept start's code (0 shape, 1 grid best, j grid_local_j), ``current``
    True when the solver's scratch holds the kept fit (it was solved last), ``unsure``
    True when the mirror of a start would change the kept fit (or could not be solved),
    ``status`` the series' :func:`provisional` status (the starts that did not converge
    here, or ended at an asymmetry <= 0, outside the family).
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
    found, unsure, failed = False, False, 0
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
            failed |= 1 << t            # for the single fit's own solver (curves_resolve)
            current = False             # the solver's scratch holds this start's end
            continue
        outcome[t] = rss
        if not found or rss < best_rss * (1.0 - SAME_RSS):
            found, best_rss, start, last, code, offset = True, rss, tags[t], t, c, off
            best[:] = theta
        current = last == t
    for t in range(total):              # logistic5 at asymmetry 1: the mirror as well
        at = tags[t] - 1
        if unsure or not found or at < 0 or mirrors[at, 0] != mirrors[at, 0]:
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
    return (found, best_rss, start, spent, current, code, offset, unsure,
            provisional(failed, total))


@numba.njit(cache=True, nogil=True, error_model="numpy")
def provisional(failed, total):
    """The kernel's ``status`` of a series fitted here whose starts ``failed`` (a bit mask
    of the ``total`` starts, in order) did not converge here: 0 when none, else
    ``2 + (total << MASK_BITS | failed)`` (:func:`failed_starts` reads it back)."""
    return 0 if failed == 0 else 2 + (total << MASK_BITS | failed)


def failed_starts(status: int) -> tuple[int, int]:
    """``(failed, total)`` of a :func:`provisional` status (>= 2)."""
    code = int(status) - 2
    return code & ((1 << MASK_BITS) - 1), code >> MASK_BITS
