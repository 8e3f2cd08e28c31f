"""Compiled residual checks of the batch kernel, and the helpers that finish them.

:func:`residual_pass` makes one pass over a series' points for the chosen
fit: residuals, hat diagonals, the outlier and influence marks, and the sums
behind Shapiro-Wilk's denominator, Durbin-Watson and its null moments (the
design sums of :mod:`service.core.checks.durbin_watson`) and Breusch-Pagan
(Koenker's studentized form, ``LM = n R^2`` of ``e^2`` on the unweighted
orthonormal powers of t). Shapiro-Wilk needs the residuals sorted; numpy's
vectorized sort does that for a whole chunk (:func:`gather_padded`, then
:func:`shapiro_w_p`).
"""

from __future__ import annotations

import numba
import numpy as np

from service.core.checks.diagnostics import MIN_TEST_DF
from service.core.checks.kernels import shapiro_p
from service.core.checks.shapiro_tables import SHAPIRO_MAX_N

OUTLIER_BIT, INFLUENTIAL_BIT = 1, 2
RESIDUAL_TESTS = ("shapiro_wilk", "shapiro_wilk_p", "breusch_pagan", "breusch_pagan_p",
                  "durbin_watson", "durbin_watson_p")
"""The batch columns of the residual tests (statistic and p-value of each)."""
_SUM = {"reassoc", "nsz"}  # vectorized sums only; no assumption about NaN or infinity


@numba.njit(cache=True, nogil=True, error_model="numpy")
def residual_pass(res, b, q, p, P, n, cuts, qb, degree, bp_sums, marks, resid, a):
    """Residuals and marks of the chosen fit; returns the counts and test statistics.

    Parameters
    ----------
    res : residual after all ``P`` columns; ``b`` effects; ``q`` basis rows.
    p : coefficients of the chosen fit (its residual adds back ``b_k q_k``, k >= p).
    cuts : (outlier, influence, leverage) limits on ``e^2/(1-h)``,
        ``e^2 h/(1-h)^2`` and ``h`` (``inf``: not tested).
    qb, degree : unweighted orthonormal basis for Breusch-Pagan, and how many
        powers it uses (0: not computed); ``bp_sums`` scratch of ``degree + 1``.
    marks, resid, a : flat outputs (outlier/influential bits, residuals) at offset ``a``.

    Returns
    -------
    counts : (n_outliers, n_influential, n_high_leverage, n_influential_outliers,
        n_high_leverage_influential_outliers)
    spread, durbin_watson, breusch_pagan : float
        ``spread`` is the sum of squared deviations (NaN outside 3..5000 points).
    dw_sums : (tr(G), ||G||_F², ||AQ||_F²) of the fit's basis (:func:`design_sums`).
    """
    out_cut, inf_cut, lev_cut = cuts
    n_out = n_inf = n_high = n_both = n_lever = 0
    s1 = s2 = s4 = dd = prev = 0.0
    bp_sums[:] = 0.0
    for i in range(n):
        e = res[i]
        for k in range(p, P):
            e += b[k] * q[k, i]
        h = 0.0
        for k in range(p):
            h += q[k, i] * q[k, i]
        one_h = 1 - h
        r = e * e / one_h
        mark = 0
        if r > out_cut:
            mark |= OUTLIER_BIT
            n_out += 1
        if r * h / one_h > inf_cut:
            mark |= INFLUENTIAL_BIT
            n_inf += 1
        if h > lev_cut:
            n_high += 1
        if mark == OUTLIER_BIT | INFLUENTIAL_BIT:
            n_both += 1
            if h > lev_cut:
                n_lever += 1
        marks[a + i] = mark
        resid[a + i] = e
        e2 = e * e
        s1 += e
        s2 += e2
        s4 += e2 * e2
        if i > 0:
            dd += (e - prev) * (e - prev)
        prev = e
        for k in range(1, degree + 1):
            bp_sums[k] += qb[k, i] * e2
    spread = s2 - n * (s1 / n) * (s1 / n) if 3 <= n <= SHAPIRO_MAX_N else np.nan
    dw = dd / s2 if s2 > 0 else np.nan
    bp = np.nan
    if degree >= 1:
        proj = 0.0
        for k in range(1, degree + 1):   # orthogonal to the constant: centring changes nothing
            proj += bp_sums[k] * bp_sums[k]
        ss = s4 - s2 * s2 / n
        if not ss > 1e-8 * s4:     # nearly constant squared residuals: centre exactly
            ss = 0.0
            for i in range(n):
                d = resid[a + i] * resid[a + i] - s2 / n
                ss += d * d
        bp = n * proj / ss if ss > 0 else np.nan
    return (n_out, n_inf, n_high, n_both, n_lever), spread, dw, bp, design_sums(q, p, n)


@numba.njit(cache=True, nogil=True, error_model="numpy", fastmath=_SUM)
def design_sums(q, p, n):
    """``tr(G)``, ``||G||_F²`` and ``||AQ||_F²`` of the basis rows ``q[:p, :n]``: the moments
    of Durbin-Watson's d (:mod:`service.core.checks.durbin_watson`).

    ``G = sum_i d_i d_i'`` over the differences ``d_i = q_i - q_(i-1)``, and
    ``||AQ||² = d_1² + sum_(i>=2) (d_i - d_(i-1))² + d_(n-1)²``; tight loops over one
    column (or a pair), outside the per-point pass.
    """
    trace_g = frob_g = frob_aq = 0.0
    if n < 2:
        return trace_g, frob_g, frob_aq
    for k in range(p):   # shifted views: no negative indices in the loops (they vectorize)
        qk = q[k]
        first, last = qk[1] - qk[0], qk[n - 1] - qk[n - 2]
        now, one_back, two_back = qk[2:n], qk[1:n - 1], qk[0:n - 2]
        diag = first * first
        aq = 0.0
        for i in range(n - 2):
            d = now[i] - one_back[i]
            s2 = d - (one_back[i] - two_back[i])
            diag += d * d
            aq += s2 * s2
        frob_aq += aq + first * first + last * last
        trace_g += diag
        frob_g += diag * diag
        k_now, k_back = qk[1:n], qk[0:n - 1]
        for j in range(k):
            j_now, j_back = q[j, 1:n], q[j, 0:n - 1]
            acc = 0.0
            for i in range(n - 1):
                acc += (k_now[i] - k_back[i]) * (j_now[i] - j_back[i])
            frob_g += 2.0 * acc * acc
    return trace_g, frob_g, frob_aq
    for k in range(p):
        qk = q[k]
        first, last = qk[1] - qk[0], qk[n - 1] - qk[n - 2]
        diag = first * first
        aq = 0.0
        for i in range(2, n):
            d = qk[i] - qk[i - 1]
            s2 = qk[i] - 2.0 * qk[i - 1] + qk[i - 2]
            diag += d * d
            aq += s2 * s2
        frob_aq += aq + first * first + last * last
        trace_g += diag
        frob_g += diag * diag
        for j in range(k):
            qj = q[j]
            acc = 0.0
            for i in range(1, n):
                acc += (qk[i] - qk[i - 1]) * (qj[i] - qj[i - 1])
            frob_g += 2.0 * acc * acc
    return trace_g, frob_g, frob_aq


@numba.njit(cache=True, nogil=True, error_model="numpy")
def gather_padded(resid, starts, lengths, width):
    """Rows ``resid[starts[g]:starts[g] + lengths[g]]`` padded with +inf to ``width``."""
    out = np.empty((starts.size, width))
    for g in range(starts.size):
        for i in range(width):
            out[g, i] = resid[starts[g] + i] if i < lengths[g] else np.inf
    return out


@numba.njit(cache=True, nogil=True, error_model="numpy")
def shapiro_w_p(srt, lengths, slot, sw_start, sw_coef, spread):
    """W = (c . e_sorted)^2 / spread with the AS R94 weights of each row's length, and its p."""
    w = np.empty(srt.shape[0])
    p = np.empty(srt.shape[0])
    for g in range(srt.shape[0]):
        at = sw_start[slot[lengths[g]]]
        acc = 0.0
        for i in range(lengths[g]):
            acc += sw_coef[at + i] * srt[g, i]
        value = acc * acc / spread[g]
        w[g] = 1.0 if value > 1.0 else value
        p[g] = shapiro_p(w[g], lengths[g])
    return w, p


@numba.njit(cache=True, nogil=True, error_model="numpy")
def collect(marks, offsets, rows, bit):
    """Series positions and in-series indices of the points whose mark has ``bit``."""
    count = 0
    for g in range(rows.size):
        for i in range(offsets[rows[g]], offsets[rows[g] + 1]):
            if marks[i] & bit:
                count += 1
    where, index = np.empty(count, dtype=np.int64), np.empty(count, dtype=np.int64)
    k = 0
    for g in range(rows.size):
        a = offsets[rows[g]]
        for i in range(a, offsets[rows[g] + 1]):
            if marks[i] & bit:
                where[k], index[k] = g, i - a
                k += 1
    return where, index


def tested_only(values: np.ndarray, df: np.ndarray) -> np.ndarray:
    """A residual test's column with NaN where the series has fewer than
    :data:`~service.core.checks.diagnostics.MIN_TEST_DF` residual df (not run, as in the
    single fit's :func:`~service.core.checks.diagnostics.formal_tests`); ``values`` itself
    when every series was tested (the common case: no copy)."""
    tested = df >= MIN_TEST_DF
    return values if tested.all() else np.where(tested, values, np.nan)
