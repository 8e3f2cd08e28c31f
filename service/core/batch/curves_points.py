"""Per-point helpers of the nonlinear batch kernel: ordering, pooling and Shapiro-Wilk.

Written for short series (tens of points) with no allocation per series:

* :func:`read_series`: the positions (ln x on the log scale) and square roots of the weights;
* :func:`sort_order`: the ascending order of ``u`` (a stable insertion sort up to
  :data:`INSERTION_MAX` points, numpy's merge sort above);
* :func:`pool`: the points pooled by distinct ``u`` (weighted means, square roots of the
  summed weights, the pure-error sum of squares) and the pool of each point;
* :func:`tangent_basis4`: the orthonormal tangent basis of a four-parameter fit;
* :func:`shapiro_w_p`: Shapiro-Wilk's ``W = (c . e_sorted)² / sum (e - mean)²`` with
  Royston's AS R94 weights ``c`` and its p-value (the single fit's formula and
  :func:`service.core.checks.kernels.shapiro_p`).
"""

from __future__ import annotations

import math

import numba
import numpy as np

from service.core.checks.kernels import shapiro_normal, shapiro_p_from

INSERTION_MAX = 64


@numba.njit(cache=True, nogil=True, error_model="numpy", inline="always")
def read_series(xs, ys, ws, log_x, x_before, u, sw):
    """The position ``u`` of each point (ln x on the log scale, -inf at x = 0) and the square
    roots ``sw`` of the weights ``ws``; returns ``(sum w y², sum w, sum w y, sum log w,
    same_x)``, ``same_x`` True when x is ``x_before`` point for point.

    A logarithm is taken only where x changes: a replicate takes the u of the point before,
    and on the log scale a point at the x of the same point of the series before
    (``x_before``, whose u ``u`` still holds: plates share their doses) keeps that u. A
    weight's root and logarithm are taken when it differs from the weight before."""
    same = x_before.size if log_x else 0
    same_x = x_before.size == xs.size
    zz = sw_total = swy = logw = 0.0
    w_last, sw_last, logw_last = 1.0, 1.0, 0.0
    for i in range(xs.size):
        same_x &= i < x_before.size and xs[i] == x_before[i]
        if i > 0 and xs[i] == xs[i - 1]:           # a replicate: the same u
            u[i] = u[i - 1]
        elif not (i < same and xs[i] == x_before[i]):
            u[i] = (math.log(xs[i]) if xs[i] > 0 else -np.inf) if log_x else xs[i]
        if ws[i] != w_last:
            w_last, sw_last, logw_last = ws[i], math.sqrt(ws[i]), math.log(ws[i])
        sw[i] = sw_last
        zz += sw[i] * ys[i] * sw[i] * ys[i]
        sw_total += ws[i]
        swy += ws[i] * ys[i]
        logw += logw_last
    return zz, sw_total, swy, logw, same_x


@numba.njit(cache=True, nogil=True, error_model="numpy", inline="always")
def sort_order(u, order):
    """Indices putting ``u`` in ascending order (stable) into ``order[:u.size]``."""
    n = u.size
    if n > INSERTION_MAX:
        order[:n] = np.argsort(u, kind="mergesort")
        return
    for i in range(n):
        j = i
        while j > 0 and u[order[j - 1]] > u[i]:
            order[j] = order[j - 1]
            j -= 1
        order[j] = i


@numba.njit(cache=True, nogil=True, error_model="numpy", inline="always")
def sort_values(values, out):
    """``values`` (no NaN) in ascending order into ``out[:values.size]``: each placed at its
    rank, counted without branches, for short series; numpy's sort above
    :data:`INSERTION_MAX`."""
    n = values.size
    if n > INSERTION_MAX:
        out[:n] = np.sort(values)
        return
    i = 0
    while i + 4 <= n:           # four ranks counted side by side (independent sums)
        v0, v1, v2, v3 = values[i], values[i + 1], values[i + 2], values[i + 3]
        r0 = r1 = r2 = r3 = 0
        for j in range(n):
            vj = values[j]
            r0 += (vj < v0) | ((vj == v0) & (j < i))
            r1 += (vj < v1) | ((vj == v1) & (j < i + 1))
            r2 += (vj < v2) | ((vj == v2) & (j < i + 2))
            r3 += (vj < v3) | ((vj == v3) & (j < i + 3))
        out[r0], out[r1], out[r2], out[r3] = v0, v1, v2, v3
        i += 4
    for k in range(i, n):
        v = values[k]
        rank = 0
        for j in range(n):
            rank += (values[j] < v) | ((values[j] == v) & (j < k))
        out[rank] = v


@numba.njit(cache=True, nogil=True, error_model="numpy", inline="always")
def pool(u, y, w, order, ul, yl, swl, which):
    """Pool the points by distinct u (in ``order``): the distinct u, weighted mean y and
    square root of the summed weights of each into ``ul``, ``yl``, ``swl``, and the pool
    of each point into ``which``; returns the number of pools and the weighted scatter of
    y about the means (the pure-error sum of squares)."""
    n = u.size
    k = 0
    ss = 0.0
    j = 0
    while j < n:
        stop = j
        sw = swy = 0.0
        while stop < n and u[order[stop]] == u[order[j]]:
            sw += w[order[stop]]
            swy += w[order[stop]] * y[order[stop]]
            which[order[stop]] = k
            stop += 1
        mean = swy / sw
        for t in range(j, stop):
            dev = y[order[t]] - mean
            ss += w[order[t]] * dev * dev
        ul[k], yl[k], swl[k] = u[order[j]], mean, math.sqrt(sw)
        k += 1
        j = stop
    return k, ss


@numba.njit(cache=True, nogil=True, error_model="numpy", inline="always")
def shapiro_w_p(e, coef, srt, normal):
    """Shapiro-Wilk's W of the residuals ``e`` and its p-value, with the AS R94 weights
    ``coef`` for ``e.size`` points (``srt``: scratch of that length; ``normal``: row
    ``e.size`` of :func:`shapiro_normals`); NaNs when all the residuals are equal or the
    weights are not given (empty ``coef``)."""
    n = e.size
    if coef.size != n:
        return np.nan, np.nan
    sort_values(e, srt)
    if srt[0] == srt[n - 1]:
        return np.nan, np.nan
    mean = 0.0
    for i in range(n):
        mean += srt[i]
    mean /= n
    spread = acc = 0.0
    for i in range(n):
        spread += (srt[i] - mean) * (srt[i] - mean)
        acc += coef[i] * srt[i]
    w = min(acc * acc / spread, 1.0)
    return w, shapiro_p_from(w, n, normal[0], normal[1])


@numba.njit(cache=True, nogil=True, error_model="numpy")
def shapiro_normals(nmax):
    """Row ``n`` (12 <= n <= nmax): :func:`service.core.checks.kernels.shapiro_normal` of n
    (computed once per chunk, not per series); NaN below 12 (not used there)."""
    out = np.full((nmax + 1, 2), np.nan)
    for n in range(12, nmax + 1):
        out[n, 0], out[n, 1] = shapiro_normal(n)
    return out


@numba.njit(cache=True, nogil=True, error_model="numpy", inline="always")
def tangent_basis4(inv, js, q, n):
    """The tangent basis rows ``q = inv js`` for p = 4 (``inv`` lower triangular, ``js``
    4 x n), each sum in the order of the kernel's loop for other p; unrolled, the loop
    over the points has no reduction and LLVM vectorizes it."""
    i00, i10, i11, i20, i21, i22 = inv[0, 0], inv[1, 0], inv[1, 1], inv[2, 0], inv[2, 1], inv[2, 2]
    i30, i31, i32, i33 = inv[3, 0], inv[3, 1], inv[3, 2], inv[3, 3]
    for i in range(n):
        j0, j1, j2, j3 = js[0, i], js[1, i], js[2, i], js[3, i]
        q[0, i] = i00 * j0
        q[1, i] = i10 * j0 + i11 * j1
        q[2, i] = i20 * j0 + i21 * j1 + i22 * j2
        q[3, i] = i30 * j0 + i31 * j1 + i32 * j2 + i33 * j3


@numba.njit(cache=True, nogil=True, error_model="numpy", inline="always")
def tangent_sums(q, p, n, gram, dq):
    """``tr(G)``, ``||G||_F²`` and ``||AQ||_F²`` of the orthonormal tangent basis rows
    ``q[:p, :n]`` (the moments of Durbin-Watson's d, as
    :func:`service.core.batch.residuals.design_sums`), in one pass over the points.

    ``G = sum_i d_i d_i'`` over the differences ``d_i = q_i - q_(i-1)`` and
    ``||AQ||² = d_1² + sum_(i>=2) (d_i - d_(i-1))² + d_(n-1)²``; ``gram`` (p x p) and
    ``dq`` (p) are scratch.
    """
    if n < 2:
        return 0.0, 0.0, 0.0
    if p == 4:
        return _tangent_sums4(q, n)
    frob_aq = 0.0
    for k in range(p):
        dq[k] = 0.0
        for j in range(k + 1):
            gram[k, j] = 0.0
    for i in range(1, n):
        for k in range(p):
            dk = q[k, i] - q[k, i - 1]
            step = dk - dq[k]
            frob_aq += step * step
            dq[k] = dk
            for j in range(k + 1):
                gram[k, j] += dk * dq[j]
    trace_g = frob_g = 0.0
    for k in range(p):
        frob_aq += dq[k] * dq[k]
        trace_g += gram[k, k]
        frob_g += gram[k, k] * gram[k, k]
        for j in range(k):
            frob_g += 2.0 * gram[k, j] * gram[k, j]
    return trace_g, frob_g, frob_aq


@numba.njit(cache=True, nogil=True, error_model="numpy")
def screen(x, y, w, offsets, log_domain, least):
    """Series the compiled engine may take: at least ``least`` points, all finite, weights
    finite and > 0 (``w`` empty: none given), and x >= 0 when ``log_domain``."""
    G = offsets.size - 1
    take = np.zeros(G, dtype=np.bool_)
    weighted = w.size > 0
    for r in range(G):
        a, b = offsets[r], offsets[r + 1]
        if b - a < least:
            continue
        ok = True
        for i in range(a, b):
            if not (math.isfinite(x[i]) and math.isfinite(y[i])) or (log_domain and x[i] < 0) \
                    or (weighted and not (w[i] > 0 and math.isfinite(w[i]))):
                ok = False
                break
        take[r] = ok
    return take


@numba.njit(cache=True, nogil=True, error_model="numpy", inline="always")
def _tangent_sums4(q, n):
    """:func:`tangent_sums` for four rows, the sums held in registers."""
    d0 = d1 = d2 = d3 = 0.0
    g00 = g10 = g11 = g20 = g21 = g22 = g30 = g31 = g32 = g33 = 0.0
    frob_aq = 0.0
    for i in range(1, n):
        e0, e1 = q[0, i] - q[0, i - 1], q[1, i] - q[1, i - 1]
        e2, e3 = q[2, i] - q[2, i - 1], q[3, i] - q[3, i - 1]
        frob_aq += (e0 - d0) ** 2 + (e1 - d1) ** 2 + (e2 - d2) ** 2 + (e3 - d3) ** 2
        g00 += e0 * e0
        g10 += e1 * e0
        g11 += e1 * e1
        g20 += e2 * e0
        g21 += e2 * e1
        g22 += e2 * e2
        g30 += e3 * e0
        g31 += e3 * e1
        g32 += e3 * e2
        g33 += e3 * e3
        d0, d1, d2, d3 = e0, e1, e2, e3
    frob_aq += d0 * d0 + d1 * d1 + d2 * d2 + d3 * d3
    off = g10 * g10 + g20 * g20 + g21 * g21 + g30 * g30 + g31 * g31 + g32 * g32
    return (g00 + g11 + g22 + g33, g00 * g00 + g11 * g11 + g22 * g22 + g33 * g33 + 2.0 * off,
            frob_aq)
