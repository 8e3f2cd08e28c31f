"""Compiled grid starts of the nonlinear batch: the best point of a family's grid.

The grid of each family has the single fit's axes
(:mod:`service.core.nonlinear.builtin`: the x range for midpoints and centres, rates
relative to the x span, a fixed range of shapes and powers); at every grid point the
conditionally linear parameters are solved exactly (:func:`.curves_starts.project`,
variable projection) and the point of lowest residual sum of squares is the start.
"""

from __future__ import annotations

import math

import numba
import numpy as np

from service.core.batch.curves_models import (
    EXPONENTIAL,
    GAUSSIAN_PEAK,
    GOMPERTZ,
    L4_LINEAR,
    L4_LOG,
    LOGISTIC_GROWTH,
    POWER,
    WEIBULL,
)
from service.core.batch.curves_models_extra import L5_LOG
from service.core.batch.curves_starts import project

STEEPNESS = np.geomspace(0.5, 100.0, 10)           # as builtin.dose_response and growth
MID_POINTS = 17
RATES = np.geomspace(0.05, 50.0, 20)               # as builtin.decay
KM_POINTS = 40                                     # as builtin.saturation
POWERS = np.linspace(-15.0, 15.0, 61)              # as builtin.saturation
CENTRES, WIDTHS = 25, 16                           # as builtin.peak
TAUS, SHAPES = 20, np.geomspace(0.25, 8.0, 11)     # as builtin.decay


@numba.njit(cache=True, nogil=True, error_model="numpy")
def _span(u):
    lo, hi = np.inf, -np.inf
    for v in u:
        if math.isfinite(v):
            lo, hi = min(lo, v), max(hi, v)
    return lo, hi, (hi - lo) if hi > lo else 1.0


@numba.njit(cache=True, nogil=True, error_model="numpy")
def _geom(lo, hi, k, count):
    """The k-th of ``count`` geometrically spaced values from lo to hi (numpy.geomspace)."""
    return math.exp(math.log(lo) + (math.log(hi) - math.log(lo)) * k / (count - 1))


@numba.njit(cache=True, nogil=True, error_model="numpy")
def grid_start(fid, x, u, y, sw, cols, coef, out, work):
    """The best point of the family's grid (nonlinear values into ``out``); False if none
    (and for logistic5 and biexponential, whose grids are :mod:`.curves_multistart_grid`'s).
    ``work``: scratch for :func:`.curves_starts.project`."""
    if fid >= L5_LOG:
        return False
    best = np.inf
    trial = np.empty(2)
    if fid == L4_LOG or fid == L4_LINEAR:
        lo, hi, span = _span(u)
        for a in range(STEEPNESS.size):            # meshgrid "ij" over (slope, ec50)
            trial[0] = STEEPNESS[a] / span
            for b in range(MID_POINTS):
                mid = lo - 0.25 * span + (1.5 * span) * b / (MID_POINTS - 1)
                trial[1] = math.exp(mid) if fid == L4_LOG else mid
                rss = project(fid, trial, u, y, sw, cols, coef, work)
                if rss < best:
                    best, out[0], out[1] = rss, trial[0], trial[1]
        return best < np.inf
    if fid == EXPONENTIAL:
        span = _span(u)[2]
        for a in range(2 * RATES.size):
            r = RATES[a - RATES.size] if a >= RATES.size else -RATES[RATES.size - 1 - a]
            trial[0] = r / span
            rss = project(fid, trial, u, y, sw, cols, coef, work)
            if rss < best:
                best, out[0] = rss, trial[0]
        return best < np.inf
    if fid == LOGISTIC_GROWTH or fid == GOMPERTZ:   # meshgrid "ij" over (rate, inflection)
        lo, hi, span = _span(u)
        for a in range(2 * STEEPNESS.size):
            r = STEEPNESS[a - STEEPNESS.size] if a >= STEEPNESS.size else \
                -STEEPNESS[STEEPNESS.size - 1 - a]
            trial[0] = r / span
            for b in range(MID_POINTS):
                trial[1] = lo - 0.25 * span + (1.5 * span) * b / (MID_POINTS - 1)
                rss = project(fid, trial, u, y, sw, cols, coef, work)
                if rss < best:
                    best, out[0], out[1] = rss, trial[0], trial[1]
        return best < np.inf
    if fid == GAUSSIAN_PEAK:                       # meshgrid "ij" over (centre, width)
        lo, hi, span = _span(u)
        distinct = np.unique(u)
        finest = span / 100.0
        if distinct.size > 1:
            finest = np.min(distinct[1:] - distinct[:-1])
        for a in range(CENTRES):
            trial[0] = lo - 0.1 * span + (1.2 * span) * a / (CENTRES - 1)
            for b in range(WIDTHS):
                trial[1] = _geom(finest / 2.0, 2.0 * span, b, WIDTHS)
                rss = project(fid, trial, u, y, sw, cols, coef, work)
                if rss < best:
                    best, out[0], out[1] = rss, trial[0], trial[1]
        return best < np.inf
    if fid == WEIBULL:                             # meshgrid "ij" over (tau, shape)
        lo, hi = np.inf, -np.inf
        for v in x:
            if v > 0:
                lo, hi = min(lo, v), max(hi, v)
        if not hi > 0:
            lo = hi = 1.0
        for a in range(TAUS):
            trial[0] = _geom(lo / 3.0, 3.0 * hi, a, TAUS)
            for b in range(SHAPES.size):
                trial[1] = SHAPES[b]
                rss = project(fid, trial, u, y, sw, cols, coef, work)
                if rss < best:
                    best, out[0], out[1] = rss, trial[0], trial[1]
        return best < np.inf
    lo, hi = np.inf, 0.0                           # km or exponent: over |x| > 0
    zero = False
    for v in x:
        if v != 0:
            lo, hi = min(lo, abs(v)), max(hi, abs(v))
        zero |= v == 0
    if hi == 0.0:
        lo = hi = 1.0
    if fid == POWER:
        ratio = math.log(hi / lo) if hi > lo else 1.0
        for a in range(POWERS.size):
            trial[0] = POWERS[a] / ratio
            if zero and not trial[0] > 0:         # 0^exponent is finite only for exponent > 0
                continue
            rss = project(fid, trial, u, y, sw, cols, coef, work)
            if rss < best:
                best, out[0] = rss, trial[0]
        return best < np.inf
    for a in range(KM_POINTS):
        trial[0] = _geom(lo / 100.0, 100.0 * hi, a, KM_POINTS)
        rss = project(fid, trial, u, y, sw, cols, coef, work)
        if rss < best:
            best, out[0] = rss, trial[0]
    return best < np.inf
