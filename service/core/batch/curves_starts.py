"""Compiled automatic start values of the nonlinear batch: the data's shape, then a grid.

The same two kinds of start as the single fit
(:mod:`service.core.nonlinear.builtin.starts`), compiled per series:

* the **shape start**: the classical hand readings of
  :mod:`service.core.nonlinear.builtin.shapes` (ends of the pooled curve, the
  half-way crossing, the logit line for logistic4; the log-distance line for
  exponential; the Hanes-Woolf line for michaelis_menten);
* the **grid start** (:mod:`.curves_grid`): the best point of the family's
  variable-projection grid.

In both the conditionally linear parameters come from one weighted linear
least-squares fit at the nonlinear values (:func:`project`).
"""

from __future__ import annotations

import math

import numba
import numpy as np

from service.core.batch.curves_models import (
    EXPONENTIAL,
    L4_LINEAR,
    L4_LOG,
    LOGISTIC_GROWTH,
    basis,
)

END_FRACTION = 0.15                               # as builtin.shapes.END_FRACTION
RANK_RTOL = 1e-10                                  # as builtin.starts.RANK_RTOL


@numba.njit(cache=True, nogil=True, error_model="numpy", inline="always")
def levels(u, y, order, lev, means):
    """Distinct ``u`` (ascending, via ``order``) and the mean y at each; returns their count."""
    k = -1
    count = 0
    for j in range(u.size):
        i = order[j]
        if k < 0 or u[i] != lev[k]:
            if k >= 0:
                means[k] /= count
            k += 1
            lev[k], means[k], count = u[i], 0.0, 0
        means[k] += y[i]
        count += 1
    if k >= 0:
        means[k] /= count
    return k + 1


@numba.njit(cache=True, nogil=True, error_model="numpy")
def _ends(means, m):
    k = max(1, int(np.rint(END_FRACTION * m)))
    left = right = 0.0
    for j in range(k):
        left += means[j]
        right += means[m - k + j]
    return left / k, right / k


@numba.njit(cache=True, nogil=True, error_model="numpy")
def _crossing(lev, means, m, level):
    """First u where the pooled curve crosses ``level`` (NaN when it does not)."""
    prev = -1
    for j in range(m):
        if not math.isfinite(lev[j]):
            continue
        if prev >= 0 and (means[j] >= level) != (means[prev] >= level):
            u0, u1, y0, y1 = lev[prev], lev[j], means[prev], means[j]
            if y1 == y0:
                return 0.5 * (u0 + u1)
            return u0 + (level - y0) * (u1 - u0) / (y1 - y0)
        prev = j
    return np.nan


@numba.njit(cache=True, nogil=True, error_model="numpy")
def _line(u, v):
    """Least-squares (intercept, slope) of v on u over the points where both are finite (the
    callers mark a point left out by a NaN v); NaNs if < 2 distinct u."""
    first = np.nan
    for i in range(u.size):
        if math.isfinite(u[i]) and math.isfinite(v[i]):
            first = u[i]
            break
    n = 0
    su = sv = 0.0
    distinct = False
    for i in range(u.size):         # selects, not branches: the pattern of kept points
        ok = math.isfinite(u[i]) & math.isfinite(v[i])      # is the data's
        distinct |= ok & (u[i] != first)
        n += ok
        su += u[i] if ok else 0.0
        sv += v[i] if ok else 0.0
    if not distinct:
        return np.nan, np.nan
    mu, mv = su / n, sv / n
    suu = suv = 0.0
    for i in range(u.size):
        ok = math.isfinite(u[i]) & math.isfinite(v[i])
        du = u[i] - mu if ok else 0.0
        suu += du * du
        suv += du * (v[i] - mv) if ok else 0.0
    slope = suv / suu
    return mv - slope * mu, slope


@numba.njit(cache=True, nogil=True, error_model="numpy")
def shape_start(fid, x, u, y, lev, means, m, out, v):
    """The nonlinear values read off the data's shape into ``out``; False when there is none
    (also for the families that start from the grid alone: logistic_growth, gompertz,
    power, gaussian_peak, weibull; and for logistic5 and biexponential, whose starts are
    :mod:`.curves_multistart`'s)."""
    n = u.size
    if fid >= LOGISTIC_GROWTH:
        return False
    if fid == L4_LOG or fid == L4_LINEAR:
        left, right = _ends(means, m)
        mid = _crossing(lev, means, m, 0.5 * (left + right))
        if right == left or mid != mid:
            return False
        for i in range(n):
            p = (y[i] - left) / (right - left)
            keep = p > 0.05 and p < 0.95 and math.isfinite(u[i])
            v[i] = math.log(p / (1.0 - p)) if keep else np.nan
        _, slope = _line(u, v)
        if not slope > 0:
            return False
        out[0], out[1] = slope, (math.exp(mid) if fid == L4_LOG else mid)
        return True
    if fid == EXPONENTIAL:
        left, right = _ends(means, m)
        change = left - right
        if change == 0:
            return False
        sign = 1.0 if change > 0 else -1.0
        for i in range(n):
            distance = sign * (y[i] - right)
            v[i] = math.log(distance) if distance > 0.05 * abs(change) else np.nan
        _, slope = _line(u, v)
        if slope != slope or slope == 0:
            return False
        out[0] = -slope
        return True
    for i in range(n):                 # michaelis_menten: Hanes-Woolf line x/y on x
        v[i] = x[i] / y[i] if y[i] != 0 and x[i] != 0 else np.nan
    intercept, slope = _line(x, v)
    if slope != slope or slope == 0 or not intercept / slope > 0:
        return False
    out[0] = intercept / slope
    return True


@numba.njit(cache=True, nogil=True, error_model="numpy")
def project(fid, nonlinear, u, y, sw, cols, coef, work):
    """Weighted least-squares linear parameters at ``nonlinear`` into ``coef``; their RSS
    (inf where the columns are not finite or the linear design is singular); ``work``:
    scratch for :func:`.curves_models.basis`."""
    if not basis(fid, nonlinear, u, cols, work):
        return np.inf
    m, n = cols.shape[0], u.size
    a11 = a12 = a22 = b1 = b2 = yy = 0.0
    for i in range(n):
        c1 = sw[i] * cols[0, i]
        t = sw[i] * y[i]
        a11 += c1 * c1
        b1 += c1 * t
        yy += t * t
        if m == 2:
            c2 = sw[i] * cols[1, i]
            a12 += c1 * c2
            a22 += c2 * c2
            b2 += c2 * t
    if m == 1:
        if not a11 > 0:
            return np.inf
        coef[0] = b1 / a11
    else:
        if not (a11 > 0 and a22 > 0):
            return np.inf
        r22 = a22 - a12 * a12 / a11
        if not r22 > (RANK_RTOL * RANK_RTOL) * a22:
            return np.inf
        coef[1] = (b2 - a12 * b1 / a11) / r22
        coef[0] = (b1 - a12 * coef[1]) / a11
    rss = 0.0
    for i in range(n):
        e = y[i] - coef[0] * cols[0, i] - (coef[1] * cols[1, i] if m == 2 else 0.0)
        rss += sw[i] * sw[i] * e * e
    return rss if math.isfinite(rss) else np.inf
