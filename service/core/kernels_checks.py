"""Compiled diagnostics of one fit in one call: per-point forms, the three formal tests
and the flagged points.

:func:`fit_checks` runs ``kernels_points.point_measures`` and then, on its
residuals:

* Shapiro-Wilk ``W = (c . e_sorted)² / sum (e - mean)²`` with Royston's AS R94
  weights ``c`` (``batch_tests.shapiro_weights``, scipy's numbers) and
  Royston's p-value (:func:`shapiro_p`; the batch kernel uses the same
  function). ``tests/core`` holds both to ``scipy.stats.shapiro``.
* Breusch-Pagan (Koenker's studentized form) ``LM = n ||Q'zc||² / ||zc||²`` and
  its chi-squared tail on ``d`` (the degree) df, :func:`chi2_tail`.
* Durbin-Watson ``sum (e_i - e_(i-1))² / sum e²``.
* The positions of outliers (``|stud| > cut``), high-leverage and influential
  points (``diagnostics.py`` documents the cut-offs).
"""

from __future__ import annotations

import math

import numba
import numpy as np

from service.core.batch_tests import C3, C4, C5, C6, GAMMA
from service.core.kernels_points import point_measures

SW_COMPUTED, SW_CONSTANT, SW_SKIPPED = 0, 1, 2


@numba.njit(cache=True, nogil=True, error_model="numpy")
def _poly(coefs, x):
    out = coefs[-1]
    for i in range(len(coefs) - 2, -1, -1):
        out = out * x + coefs[i]
    return out


@numba.njit(cache=True, nogil=True, error_model="numpy")
def shapiro_p(w, n):
    """Royston's p-value for Shapiro-Wilk's W of ``n`` points (AS R94); NaN below 3 points."""
    if n < 3 or w != w:
        return np.nan
    if n == 3:
        return max(6.0 / math.pi * (math.asin(math.sqrt(w)) - math.pi / 3.0), 0.0)
    y = math.log1p(-w)
    if n >= 12:
        ln = math.log(n)
        z = (y - _poly(C5, ln)) / math.exp(_poly(C6, ln))
    else:
        gamma = _poly(GAMMA, n)
        if y >= gamma:
            return 1e-99
        z = (-math.log(gamma - y) - _poly(C3, n)) / math.exp(_poly(C4, n))
    return 0.5 * math.erfc(z / math.sqrt(2.0))   # upper normal tail at z


@numba.njit(cache=True, nogil=True, error_model="numpy")
def chi2_tail(df, x):
    """``P(chi²_df > x)`` for a whole ``df >= 1`` (sums of positive terms: full relative
    accuracy in the tail).

    Even df: ``exp(-x/2) sum_{j < df/2} (x/2)^j / j!``; odd df:
    ``erfc(sqrt(x/2)) + exp(-x/2) sum_{j=1}^{(df-1)/2} (x/2)^(j-1/2) / Gamma(j+1/2)``
    (Abramowitz & Stegun 26.4.4, 26.4.5).
    """
    if not x > 0.0:
        return 1.0 if x == 0.0 or x < 0.0 else np.nan
    if x == np.inf:
        return 0.0
    h = 0.5 * x
    if df % 2 == 0:
        term = total = 1.0
        for j in range(1, df // 2):
            term *= h / j
            total += term
        return math.exp(-h) * total
    term = math.sqrt(h) / math.gamma(1.5)
    total = 0.0
    for j in range(1, (df - 1) // 2 + 1):
        total += term
        term *= h / (j + 0.5)
    return math.erfc(math.sqrt(h)) + math.exp(-h) * total


@numba.njit(cache=True, nogil=True, error_model="numpy")
def _positions(index, values, cut, absolute):
    keep = np.empty(values.size, dtype=np.int64)
    k = 0
    for i in range(values.size):
        v = abs(values[i]) if absolute else values[i]
        if v > cut:
            keep[k] = index[i]
            k += 1
    return keep[:k]


@numba.njit(cache=True, nogil=True, error_model="numpy")
def fit_checks(t, sw, zw, first, rinv, effects, p, rss, df, bp_rinv, out, tested,
               sw_coef, index, cuts):
    """Per-point forms into ``out`` (``point_measures``), then the tests and flagged points.

    ``tested`` False (exact fit or no residual df) leaves the studentized rows
    of ``out`` NaN and the tests NaN. ``sw_coef`` holds the Shapiro-Wilk weights
    for ``n`` points, or is empty to skip the test. ``cuts`` = (outlier t,
    leverage, Cook's distance); ``index`` maps positions to the caller's.

    Returns
    -------
    sw_status : SW_COMPUTED, SW_CONSTANT (residuals all equal) or SW_SKIPPED.
    w, w_p, lm, lm_p, dw : float
        Shapiro-Wilk W and p, Breusch-Pagan LM and p (NaN when ``bp_rinv`` is
        empty or the squared residuals are constant), Durbin-Watson.
    outliers, high, influential : int64 arrays of caller positions.
    """
    n = t.size
    ss, ss_diff, proj, ss_zc = point_measures(t, sw, zw, first, rinv, effects, p, rss, df,
                                              bp_rinv, out)
    if not tested:
        out[2:] = np.nan
    w = w_p = lm = lm_p = dw = np.nan
    status = SW_SKIPPED
    if tested:
        dw = ss_diff / ss if ss > 0 else np.nan
        if sw_coef.size == n:
            srt = np.sort(out[0])
            status = SW_CONSTANT
            if srt[0] != srt[-1]:
                status = SW_COMPUTED
                mean = 0.0
                for i in range(n):
                    mean += srt[i]
                mean /= n
                spread = 0.0
                acc = 0.0
                for i in range(n):
                    spread += (srt[i] - mean) * (srt[i] - mean)
                    acc += sw_coef[i] * srt[i]
                w = min(acc * acc / spread, 1.0)
                w_p = shapiro_p(w, n)
        d = bp_rinv.shape[0] - 1
        if d >= 1 and ss_zc > 0:
            lm = n * np.sum(proj * proj) / ss_zc
            lm_p = chi2_tail(d, lm)
    outliers = _positions(index, out[3], cuts[0], True)
    high = _positions(index, out[1], cuts[1], False) if n > p else index[:0]
    influential = _positions(index, out[4], cuts[2], False)
    return status, w, w_p, lm, lm_p, dw, outliers, high, influential
