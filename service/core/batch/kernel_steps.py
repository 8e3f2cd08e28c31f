"""Compiled steps of the batch engine's per-series kernel: screening a series, choosing
one candidate degree, and PRESS of every candidate.

:func:`service.core.batch.kernel.fit_rows` calls them once per series.
"""

from __future__ import annotations

import math

import numba
import numpy as np


@numba.njit(cache=True, nogil=True, error_model="numpy")
def screen(uu, zz, w, a, n, unit, limit, tiny):
    """Whether a series suits the kernel, and the range of its x.

    Every value finite (a transform outside its domain gives NaN or inf), weights
    positive, and magnitudes whose squares sum safely in float64 (the limits of
    :func:`service.core.data.inputs.check_magnitude`, ``limit`` for this length). Others go
    to fit_series.
    """
    small, big, top_z, top_w = np.inf, -np.inf, 0.0, 0.0
    for i in range(n):
        x, y = uu[i], zz[i]
        if not (math.isfinite(x) and math.isfinite(y)):
            return False, small, big
        small, big = min(small, x), max(big, x)
        top_z = max(top_z, abs(y))
        if not unit:
            if not (math.isfinite(w[a + i]) and w[a + i] > 0):
                return False, small, big
            top_w = max(top_w, w[a + i])
    for top in (max(abs(small), abs(big)), top_z, top_w):
        if top > limit or 0 < top < tiny:
            return False, small, big
    return n > 0, small, big


@numba.njit(cache=True, nogil=True, error_model="numpy")
def select(code, cand, exact, f, crit, df, m, alpha_near):
    """Chosen candidate index, climb length and whether an F sits at its critical value."""
    first_exact = -1
    for j in range(m):
        if exact[j]:
            first_exact = j
            break
    climb, near = 0, False
    if code == 6:
        return 0, 0, False
    if code == 0:
        for j in range(1, m):
            c = crit[max(int(df[j]), 1)]
            if abs(f[j] - c) <= alpha_near * c:
                near = True
            if not f[j] > c:
                break
            climb += 1
        if first_exact >= 0 and first_exact <= climb + 1:
            return first_exact, climb, near
        return climb, climb, near
    row = 4 if code == 5 else 4 + code  # adj_r2; aic, aicc, bic, press
    pick, best = -1, 0.0
    for j in range(m):
        v = cand[row, j]
        if v != v:
            continue
        if pick < 0 or (v > best if code == 5 else v < best):
            pick, best = j, v
    if first_exact >= 0:
        return first_exact, 0, False
    return max(pick, 0), 0, False


@numba.njit(cache=True, nogil=True, error_model="numpy")
def press(q, b, res, e, n, P, kmin, m, lev_one, exact, cc):
    """PRESS of every candidate (``sum (e_i / (1 - h_i))^2``; NaN when some h_i ~ 1)."""
    e[:n] = res[:n]
    kk = P
    for j in range(m - 1, -1, -1):   # walk down from the largest model
        k = kmin + j
        while kk > k:
            kk -= 1
            for i in range(n):
                e[i] += b[kk] * q[kk, i]
        total, ok = 0.0, True
        for i in range(n):
            lev = 0.0
            for r in range(k):
                lev += q[r, i] * q[r, i]
            if not lev < lev_one:
                ok = False
            loo = e[i] / (1 - lev)
            total += loo * loo
        cc[8, j] = 0.0 if exact[j] else (total if ok else np.nan)
