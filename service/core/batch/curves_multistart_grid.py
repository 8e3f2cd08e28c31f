"""Compiled start values of the multi-start families of the nonlinear batch (logistic5,
biexponential): the single fit's grid with its local minima, and curve peeling.

The grid has the single fit's axes (:mod:`service.core.nonlinear.builtin.dose_response`,
:mod:`service.core.nonlinear.builtin.decay`): logistic5 signed slope x ec50 x asymmetry
(only slope > 0 when some x is 0 on the log scale), biexponential both rates over the same
range. At every grid point the two linear parameters are solved exactly (variable
projection, on the pooled data: the RSS of the points less the pure-error sum of
squares, which is added back); the starts are the best point and the next local minima
(no higher than any neighbour: ``scipy.ndimage.minimum_filter`` of width 3 with edge
replication, as :func:`service.core.nonlinear.builtin.starts.grid_starts`) of distinct
RSS (1e-9 relative), at most :data:`COUNT`.
"""

from __future__ import annotations

import math

import numba
import numpy as np

from service.core.batch.curves_models_extra import BIEXPONENTIAL, L5_LOG
from service.core.batch.curves_starts import _line

STEEPNESS = np.geomspace(0.5, 100.0, 10)               # as builtin.dose_response
MID_POINTS = 17
ASYMMETRY = np.array([0.1, 0.25, 0.5, 1.0, 2.0, 4.0, 10.0])
TWO_RATES = np.geomspace(0.02, 100.0, 26)              # as builtin.decay
COUNT = 4                                              # grid starts, as automatic_starts
RANK_RTOL = 1e-10                                      # as builtin.starts.RANK_RTOL


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
