"""Compiled per-point loops of one fit: candidate sums, residual forms and influence, test sums.

Every loop regenerates the design row of a point from ``t`` (and ``sqrt_w``)
instead of reading a stored design, and works in chunks of :data:`CHUNK`
points so the inner loops run over contiguous scratch rows (SIMD) and no
array of the series' length is created except the outputs. The orthonormal
basis value of point i is ``q_i = R^-T v(t_i)``, formed as
``q_j = sum_{k<=j} Rinv[k, j] v_k`` with ``Rinv`` the (float64) inverse of
the R factor; leverage and fitted values are running sums over ``j`` in
entry order (``h = q_0² + q_1² + ...``, ``f = e_0 q_0 + e_1 q_1 + ...``).

Sums over points use reassociated (vectorized) additions: they agree with
a sequential sum to rounding (a few ulps of the sum of the magnitudes).
"""

from __future__ import annotations

import numba
import numpy as np

from service.core.checks.kernels import point_forms

CHUNK = 256
_SUM = {"reassoc", "nsz"}  # vectorized sums only; no assumption about NaN or infinity
# error_model="numpy": x / 0 gives inf or NaN as in numpy (the callers ignore FP exceptions)
# Reassociated sums may round differently in a kernel compiled in the process than in the same
# kernel loaded from numba's cache: PRESS and Breusch-Pagan changed in their last digits between
# processes while factor_short and fit_checks had candidate_sums / point_measures compiled into
# them. They are called from Python now and point_measures' two helpers are inlined by numba;
# on 13 seeded fits every number then agreed bit for bit, except Breusch-Pagan and
# Durbin-Watson of one weighted 700-point fit. Only dropping "reassoc" made all agree (the
# kernels then run up to 4x slower at 100,000 points).


@numba.njit(cache=True, nogil=True, error_model="numpy", fastmath=_SUM)
def design_rows(t, sw, s0, m, first, p, v):
    """Rows ``v[k, :m]`` of points ``s0 .. s0+m``: ``sw * t^(k + first)`` (``sw`` empty: 1)."""
    for i in range(m):
        base = 1.0 if sw.size == 0 else sw[s0 + i]
        v[0, i] = base * t[s0 + i] if first else base
    for k in range(1, p):
        for i in range(m):
            v[k, i] = v[k - 1, i] * t[s0 + i]


@numba.njit(cache=True, nogil=True, error_model="numpy", fastmath=_SUM)
def _basis_row(rinv, v, j, m, qj):
    """``qj[:m] = sum_{k<=j} rinv[k, j] v[k, :m]`` (row j of ``R^-T v``)."""
    c = rinv[0, j]
    for i in range(m):
        qj[i] = c * v[0, i]
    for k in range(1, j + 1):
        c = rinv[k, j]
        for i in range(m):
            qj[i] += c * v[k, i]


@numba.njit(cache=True, nogil=True, error_model="numpy", fastmath=_SUM)
def _add_column(rinv, v, j, m, ej, q, h, f):
    """Add basis column ``j`` to the running sums: ``h[:m] += q_j²`` (leverage) and
    ``f[:m] += ej q_j`` (fitted values), with ``q_j`` from :func:`_basis_row` (into ``q``)."""
    _basis_row(rinv, v, j, m, q)
    for i in range(m):
        h[i] += q[i] * q[i]
        f[i] += ej * q[i]


@numba.njit(cache=True, nogil=True, error_model="numpy", fastmath=_SUM)
def candidate_sums(t, sw, zw, first, rinv, effects, ps, leverage_one):
    """PRESS and the largest leverage of each candidate, and the largest model's RSS.

    Parameters
    ----------
    t, sw, zw : ndarray
        Scaled x, square-root weights (empty when unweighted), weighted response.
    first : int
        Exponent of the first column (0 with an intercept, else 1).
    rinv, effects : ndarray
        ``R^-1`` (P x P, float64) and ``Q'zw`` (P,) of the largest model.
    ps : ndarray of int64
        Numbers of coefficients of the candidates, ascending.
    leverage_one : float
        PRESS is NaN for a candidate with a leverage at or above this.

    Returns
    -------
    press, max_leverage : ndarray (len(ps),)
    rss : float
        Sum of squared residuals of the P-coefficient model.
    """
    n, big = t.size, rinv.shape[0]
    v = np.empty((big, CHUNK))
    q = np.empty(CHUNK)
    h = np.empty(CHUNK)
    f = np.empty(CHUNK)
    press = np.zeros(ps.size)
    hmax = np.zeros(ps.size)
    rss = 0.0
    for s0 in range(0, n, CHUNK):
        m = min(CHUNK, n - s0)
        design_rows(t, sw, s0, m, first, big, v)
        h[:m] = 0.0
        f[:m] = 0.0
        c = 0
        for j in range(big):
            _add_column(rinv, v, j, m, effects[j], q, h, f)
            if c < ps.size and ps[c] == j + 1:
                acc, top = 0.0, hmax[c]
                for i in range(m):
                    loo = (zw[s0 + i] - f[i]) / (1 - h[i])
                    acc += loo * loo
                    top = max(top, h[i])
                press[c] += acc
                hmax[c] = top
                c += 1
        acc = 0.0
        for i in range(m):
            e = zw[s0 + i] - f[i]
            acc += e * e
        rss += acc
    for c in range(ps.size):
        if hmax[c] >= leverage_one:
            press[c] = np.nan
    return press, hmax, rss


@numba.njit(cache=True, nogil=True, error_model="numpy", fastmath=_SUM)
def point_measures(t, sw, zw, first, rinv, effects, p, rss, df, bp_rinv, out):
    """Residual forms and influence of the ``p``-coefficient fit, written into ``out``.

    ``out`` (6 x n) receives, by row: weighted residual ``e``, leverage ``h``, then
    the shared per-point forms of :func:`service.core.checks.kernels.point_forms`
    (studentized residuals, Cook's distance, DFFITS).

    ``bp_rinv`` is ``R^-1`` (d x d) of the unweighted powers ``t^0..t^(d-1)``
    (Breusch-Pagan), or empty to skip that projection.

    Returns
    -------
    ss, ss_diff : float
        ``sum e²`` and ``sum (e_i - e_(i-1))²`` (Durbin-Watson).
    proj : ndarray (d,)
        ``sum_i q_j(t_i) zc_i`` for the centred squared residuals
        ``zc = e² - mean(e²)`` and the orthonormal basis ``q = R^-T v(t)`` of ``bp_rinv``.
    ss_zc : float
        ``sum zc²``.
    dw_sums : ndarray (3,)
        ``tr(G)``, ``||G||_F²`` and ``||AQ||_F²`` of the fit's basis (the moments of
        Durbin-Watson's d, :mod:`service.core.checks.durbin_watson`).
    """
    n = t.size
    v = np.empty((p, CHUNK))
    q = np.empty((p, CHUNK))
    dq = np.empty((p, CHUNK))
    carry = np.zeros((2, p))   # the previous point's basis row and its difference
    gram = np.zeros((p, p))
    frob_aq = 0.0
    ss = 0.0
    e_row, h_row = out[0], out[1]
    for s0 in range(0, n, CHUNK):
        m = min(CHUNK, n - s0)
        design_rows(t, sw, s0, m, first, p, v)
        h = h_row[s0:s0 + m]
        e = e_row[s0:s0 + m]
        h[:] = 0.0
        e[:] = 0.0
        for j in range(p):
            _add_column(rinv, v, j, m, effects[j], q[j], h, e)
        acc = 0.0
        for i in range(m):
            e[i] = zw[s0 + i] - e[i]
            acc += e[i] * e[i]
        ss += acc
        point_forms(out, s0, m, p, rss, df)
        frob_aq += _difference_sums(q, dq, m, p, s0 == 0, carry, gram)
    for j in range(p):
        frob_aq += carry[1, j] * carry[1, j]
    ss_diff = 0.0
    for i in range(1, n):
        ss_diff += (e_row[i] - e_row[i - 1]) * (e_row[i] - e_row[i - 1])
    proj, ss_zc = _projection(t, e_row, bp_rinv, ss / n)
    dw_sums = np.zeros(3)
    for j in range(p):
        dw_sums[0] += gram[j, j]
        for k in range(p):
            dw_sums[1] += gram[j, k] * gram[j, k]
    dw_sums[2] = frob_aq
    return ss, ss_diff, proj, ss_zc, dw_sums


@numba.njit(cache=True, nogil=True, error_model="numpy", fastmath=_SUM, inline="always")
def _difference_sums(q, dq, m, p, first, carry, gram):
    """Add one chunk's consecutive basis differences ``d_i = q_i - q_(i-1)`` to ``gram``
    (``G = sum d d'``); return its share of ``||AQ||² = sum_i (d_i - d_(i+1))²``.

    ``carry`` holds the previous point's row ``q`` and difference ``d`` (``d_0 = 0``);
    the caller adds the last difference squared (``d_n = 0``) after the last chunk.
    """
    frob_aq = 0.0
    for j in range(p):   # shifted views: no negative indices in the loops (they vectorize)
        qj, dj = q[j], dq[j]
        dj[0] = 0.0 if first else qj[0] - carry[0, j]
        q_now, q_back, d_now, d_back = qj[1:m], qj[0:m - 1], dj[1:m], dj[0:m - 1]
        for i in range(m - 1):
            d_now[i] = q_now[i] - q_back[i]
        acc = (dj[0] - carry[1, j]) * (dj[0] - carry[1, j])
        diag = dj[0] * dj[0]
        for i in range(m - 1):
            acc += (d_now[i] - d_back[i]) * (d_now[i] - d_back[i])
            diag += d_now[i] * d_now[i]
        frob_aq += acc
        gram[j, j] += diag
        carry[0, j], carry[1, j] = qj[m - 1], dj[m - 1]
    for j in range(1, p):
        for k in range(j):
            acc = 0.0
            for i in range(m):
                acc += dq[j, i] * dq[k, i]
            gram[j, k] += acc
            gram[k, j] = gram[j, k]
    return frob_aq


@numba.njit(cache=True, nogil=True, error_model="numpy", fastmath=_SUM, inline="always")
def _projection(t, e, rinv, mean):
    """``(Q'zc, ||zc||²)`` for ``zc = e² - mean`` and ``Q = V R^-1`` of the unweighted powers."""
    n, d = t.size, rinv.shape[0]
    proj = np.zeros(d)
    if d == 0:
        return proj, np.nan
    v = np.empty((d, CHUNK))
    q = np.empty(CHUNK)
    zc = np.empty(CHUNK)
    none = np.empty(0)
    ss = 0.0
    for s0 in range(0, n, CHUNK):
        m = min(CHUNK, n - s0)
        design_rows(t, none, s0, m, 0, d, v)
        acc = 0.0
        for i in range(m):
            zc[i] = e[s0 + i] * e[s0 + i] - mean
            acc += zc[i] * zc[i]
        ss += acc
        for j in range(d):
            _basis_row(rinv, v, j, m, q)
            acc = 0.0
            for i in range(m):
                acc += q[i] * zc[i]
            proj[j] += acc
    return proj, ss
