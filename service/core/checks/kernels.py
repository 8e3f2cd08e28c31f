"""Compiled residual checks shared by every family: per-point forms, the formal tests and
the flagged points, from weighted residuals and leverages.

* Per-point forms (:func:`point_forms`), with ``e`` the weighted residuals and
  ``h`` the leverages: internally studentized ``e / (sigma sqrt(1-h))``,
  externally studentized ``e / sqrt(s_(i)² (1-h))`` with
  ``s_(i)² = (rss - e²/(1-h)) / (df-1)``, Cook's distance ``std² h / (p (1-h))``
  and DFFITS ``stud sqrt(h/(1-h))``.
* Shapiro-Wilk ``W = (c . e_sorted)² / sum (e - mean)²`` with Royston's AS R94
  weights ``c`` (``checks.shapiro_tables.shapiro_weights``, scipy's numbers) and
  Royston's p-value (:func:`shapiro_p`; the batch kernel uses the same
  function). ``tests/core`` holds both to ``scipy.stats.shapiro``.
* Breusch-Pagan (Koenker's studentized form) ``LM = n ||Q'zc||² / ||zc||²`` for
  the centred squared residuals ``zc`` and an orthonormal basis ``Q`` of the
  family's auxiliary regressors, and its chi-squared tail (:func:`chi2_tail`).
* Durbin-Watson ``sum (e_i - e_(i-1))² / sum e²``, and its one-sided p-value from
  the design's moments of d (:func:`dw_p`; the moments are described in
  :mod:`service.core.checks.durbin_watson`) with a compiled regularized incomplete
  beta function (:func:`beta_cdf`, checked against ``scipy.special.betainc``).
"""

from __future__ import annotations

import math

import numba
import numpy as np

from service.core.checks.shapiro_tables import C3, C4, C5, C6, GAMMA

SW_COMPUTED, SW_CONSTANT, SW_SKIPPED = 0, 1, 2
_SUM = {"reassoc", "nsz"}  # vectorized sums only; no assumption about NaN or infinity


@numba.njit(cache=True, nogil=True, error_model="numpy")
def _poly(coefs, x):
    out = coefs[-1]
    for i in range(len(coefs) - 2, -1, -1):
        out = out * x + coefs[i]
    return out


@numba.njit(cache=True, nogil=True, error_model="numpy")
def shapiro_normal(n):
    """Mean and SD of Royston's normal approximation of ``log(1 - W)`` for ``n >= 12``
    points (AS R94); they depend on ``n`` only."""
    ln = math.log(n)
    return _poly(C5, ln), math.exp(_poly(C6, ln))


@numba.njit(cache=True, nogil=True, error_model="numpy")
def shapiro_p(w, n):
    """Royston's p-value for Shapiro-Wilk's W of ``n`` points (AS R94); NaN below 3 points."""
    if n < 3 or w != w:
        return np.nan
    if n == 3:
        return max(6.0 / math.pi * (math.asin(math.sqrt(w)) - math.pi / 3.0), 0.0)
    y = math.log1p(-w)
    if n >= 12:
        location, scale = shapiro_normal(n)
        z = (y - location) / scale
    else:
        gamma = _poly(GAMMA, n)
        if y >= gamma:
            return 1e-99
        z = (-math.log(gamma - y) - _poly(C3, n)) / math.exp(_poly(C4, n))
    return 0.5 * math.erfc(z / math.sqrt(2.0))   # upper normal tail at z


@numba.njit(cache=True, nogil=True, error_model="numpy")
def shapiro_p_from(w, n, location, scale):
    """:func:`shapiro_p` with ``shapiro_normal(n)`` given (ignored below 12 points)."""
    if n < 12 or w != w:
        return shapiro_p(w, n)
    return 0.5 * math.erfc((math.log1p(-w) - location) / scale / math.sqrt(2.0))


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
    if df == 1:
        return math.erfc(math.sqrt(h))         # the odd sum below is empty
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
def beta_fraction(a, b, x):
    """Continued fraction of the incomplete beta function (converges fast for
    ``x < (a + 1) / (a + b + 2)``): ``1 / (1 + d_1 / (1 + d_2 / (1 + ...)))`` with the
    coefficients of Numerical Recipes (Press et al., 3rd ed., sec. 6.4), summed by the
    forward recurrence of its convergents ``A_j / B_j`` (Wallis; NR's first edition's
    ``betacf``): two multiply-adds per term on the dependency chain, where the modified
    Lentz form divides twice per term. The convergents are rescaled when ``|B|`` leaves
    [1e-100, 1e100]; the sum stops when two convergents agree to 1e-16."""
    a_prev, a_cur = 1.0, 1.0                   # A_1, A_2 (A_0 = 0, B_0 = 1)
    b_prev, b_cur = 1.0, 1.0 - (a + b) * x / (a + 1.0)
    for m in range(1, 100_000):
        even = m * (b - m) * x / ((a - 1.0 + 2 * m) * (a + 2 * m))
        odd = -(a + m) * (a + b + m) * x / ((a + 2 * m) * (a + 1.0 + 2 * m))
        a_mid, b_mid = a_cur + even * a_prev, b_cur + even * b_prev
        a_new, b_new = a_mid + odd * a_cur, b_mid + odd * b_cur
        a_prev, a_cur, b_prev, b_cur = a_mid, a_new, b_mid, b_new
        if not 1e-100 < abs(b_cur) < 1e100:
            scale = 1.0 / b_cur if b_cur != 0 else 1.0
            a_prev, a_cur, b_prev, b_cur = a_prev * scale, a_cur * scale, \
                b_prev * scale, b_cur * scale
        if abs(a_cur * b_prev - a_prev * b_cur) < 1e-16 * abs(a_prev * b_cur):
            break
    return a_cur / b_cur


@numba.njit(cache=True, nogil=True, error_model="numpy")
def _stirling_tail(z):
    """``ln Gamma(z) - ((z - 1/2) ln z - z + ln(2 pi) / 2)`` for z >= 10 (A&S 6.1.41)."""
    inv = 1.0 / z
    r = inv * inv
    return (1.0 / 12.0 - r * (1.0 / 360.0 - r * (1.0 / 1260.0 - r * (1.0 / 1680.0)))) * inv


@numba.njit(cache=True, nogil=True, error_model="numpy")
def _log_front(a, b, x):
    """``ln(x^a (1 - x)^b / B(a, b))``. For a, b >= 10 written around ``x0 = a / (a + b)``
    with Stirling's series, so that large a and b lose no digits to cancellation."""
    if a < 10.0 or b < 10.0:
        return (math.lgamma(a + b) - math.lgamma(a) - math.lgamma(b)
                + a * math.log(x) + b * math.log1p(-x))
    x0 = a / (a + b)
    delta = x - x0
    return (a * math.log1p(delta / x0) + b * math.log1p(-delta / (1.0 - x0))
            + 0.5 * math.log(a / (a + b) * b / (2.0 * math.pi))
            - _stirling_tail(a) - _stirling_tail(b) + _stirling_tail(a + b))


@numba.njit(cache=True, nogil=True, error_model="numpy")
def beta_cdf(a, b, x):
    """Regularized incomplete beta ``I_x(a, b)`` for ``a, b > 0`` (the lower tail)."""
    if not (a > 0 and b > 0) or x != x:
        return np.nan
    if x <= 0.0:
        return 0.0
    if x >= 1.0:
        return 1.0
    log_front = _log_front(a, b, x)
    if x < (a + 1.0) / (a + b + 2.0):
        return math.exp(log_front) * beta_fraction(a, b, x) / a
    return 1.0 - math.exp(log_front) * beta_fraction(b, a, 1.0 - x) / b


@numba.njit(cache=True, nogil=True, error_model="numpy")
def dw_traces(n, trace_g, frob_g, frob_aq):
    """``(tr(MA), tr((MA)²))`` from the design sums ``tr(G)``, ``||G||²``, ``||AQ||²``."""
    return 2.0 * (n - 1) - trace_g, (6.0 * n - 8.0) - 2.0 * frob_aq + frob_g


@numba.njit(cache=True, nogil=True, error_model="numpy")
def dw_p(d, k, tr1, tr2):
    """``P(d <= d_obs)``: ``d / 4`` as a beta variable with the mean ``tr1 / k`` and the
    variance ``2 (k tr2 - tr1²) / (k² (k + 2))`` of ``d`` (over 16); NaN when undefined."""
    if not k >= 2 or d != d:
        return np.nan
    mean = tr1 / k / 4.0
    var = 2.0 * (k * tr2 - tr1 * tr1) / (k * k * (k + 2.0)) / 16.0
    if not (var > 0 and 0 < mean < 1):
        return np.nan
    spread = mean * (1.0 - mean) / var - 1.0
    if not spread > 0:
        return np.nan
    return beta_cdf(mean * spread, (1.0 - mean) * spread, min(max(d / 4.0, 0.0), 1.0))


@numba.njit(cache=True, nogil=True, error_model="numpy")
def dw_p_many(d, k, tr1, tr2):
    """:func:`dw_p` of each row of equal-length arrays."""
    out = np.empty(d.size)
    for i in range(d.size):
        out[i] = dw_p(d[i], k[i], tr1[i], tr2[i])
    return out


@numba.njit(cache=True, nogil=True, error_model="numpy")
def positions(index, values, cut, absolute):
    """Caller positions (``index``) of the values above ``cut`` (in absolute value if asked)."""
    keep = np.empty(values.size, dtype=np.int64)
    k = 0
    for i in range(values.size):
        v = abs(values[i]) if absolute else values[i]
        if v > cut:
            keep[k] = index[i]
            k += 1
    return keep[:k]


@numba.njit(cache=True, nogil=True, error_model="numpy", fastmath=_SUM)
def point_forms(out, s0, m, p, rss, df):
    """Studentized residuals, Cook's distance and DFFITS of points ``s0 .. s0+m``.

    ``out`` (6 x n) holds the weighted residual ``e`` in row 0 and the leverage
    ``h`` in row 1; rows 2..5 receive the internally and externally studentized
    residuals, Cook's distance and DFFITS. ``df`` below 2 leaves the externally
    studentized row (and DFFITS) NaN.
    """
    sigma = np.sqrt(rss / df) if df > 0 else np.nan
    e, h = out[0, s0:s0 + m], out[1, s0:s0 + m]
    std, stud = out[2, s0:s0 + m], out[3, s0:s0 + m]
    cook, dffits = out[4, s0:s0 + m], out[5, s0:s0 + m]
    for i in range(m):
        std[i] = e[i] / (np.sqrt(1 - h[i]) * sigma)
        cook[i] = std[i] * std[i] * h[i] / (p * (1 - h[i]))
    if df > 1:
        for i in range(m):
            one_h = 1 - h[i]
            stud[i] = e[i] / np.sqrt((rss - e[i] * e[i] / one_h) / (df - 1) * one_h)
            dffits[i] = stud[i] * np.sqrt(h[i] / one_h)
    else:
        stud[:] = np.nan
        dffits[:] = np.nan


@numba.njit(cache=True, nogil=True, error_model="numpy")
def residual_tests(e, ss, ss_diff, proj, ss_zc, bp_df, tested, sw_coef):
    """Shapiro-Wilk, Breusch-Pagan and Durbin-Watson of the weighted residuals ``e``.

    ``ss = sum e²``, ``ss_diff = sum (e_i - e_(i-1))²``, ``proj = Q'zc`` for an
    orthonormal basis ``Q`` of the auxiliary regressors (the constant included),
    ``ss_zc = ||zc||²`` and ``bp_df`` the test's df (below 1 skips it).
    ``sw_coef`` holds the Shapiro-Wilk weights for ``n`` points, or is empty to
    skip that test; ``tested`` False returns every statistic NaN.

    Returns
    -------
    sw_status : SW_COMPUTED, SW_CONSTANT (residuals all equal) or SW_SKIPPED.
    w, w_p, lm, lm_p, dw : float
    """
    n = e.size
    w = w_p = lm = lm_p = dw = np.nan
    status = SW_SKIPPED
    if tested:
        dw = ss_diff / ss if ss > 0 else np.nan
        if sw_coef.size == n:
            srt = np.sort(e)
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
        if bp_df >= 1 and ss_zc > 0:
            lm = n * np.sum(proj * proj) / ss_zc
            lm_p = chi2_tail(bp_df, lm)
    return status, w, w_p, lm, lm_p, dw
