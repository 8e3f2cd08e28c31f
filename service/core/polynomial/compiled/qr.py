"""Compiled float64 factorizations of one series' design (rows regenerated from ``t``).

* :func:`gram` — the Gram matrix of ``[V, zw]`` (``V`` the weighted design)
  in one pass, or of ``[V R1^-1, zw]`` for CholeskyQR2's second pass; the
  design is never stored.
* :func:`factor_short` — a short series in one call: scaled x, weighted
  response and :func:`householder`.
* :func:`householder` — Householder QR of the transposed design ``[V, zw]'``
  column by column, as ``service.core.polynomial.qr.householder`` does in extended
  precision (the same reflections, in float64), with ``R^-1``.
* :func:`float64_loss` — the estimated relative error a float64 factorization
  leaves in the basis and raw-power coefficients (the fit's precision check).
"""

from __future__ import annotations

import numba
import numpy as np

from service.core.polynomial.compiled.points import CHUNK, _basis_row, design_rows

_SUM = {"reassoc", "nsz"}


@numba.njit(cache=True, nogil=True, error_model="numpy", fastmath=_SUM)
def gram(t, sw, zw, first, p, rinv):
    """``A'A`` ((p+1) x (p+1)) for ``A = [V, zw]``, or ``A = [V rinv, zw]`` when
    ``rinv`` (p x p, upper triangular) is not empty."""
    n = t.size
    a = np.empty((p + 1, CHUNK))
    v = np.empty((p, CHUNK))
    g = np.zeros((p + 1, p + 1))
    for s0 in range(0, n, CHUNK):
        m = min(CHUNK, n - s0)
        if rinv.size == 0:
            design_rows(t, sw, s0, m, first, p, a)
        else:
            design_rows(t, sw, s0, m, first, p, v)
            for j in range(p):
                _basis_row(rinv, v, j, m, a[j])
        a[p, :m] = zw[s0:s0 + m]
        for r in range(p + 1):
            for c in range(r + 1):
                acc = 0.0
                for i in range(m):
                    acc += a[r, i] * a[c, i]
                g[r, c] += acc
    for r in range(p + 1):
        for c in range(r):
            g[c, r] = g[r, c]
    return g


@numba.njit(cache=True, nogil=True, error_model="numpy")
def factor_short(u, shift, scale, sw, z, first, p, tol):
    """``t = (u - shift) / scale``, ``zw = sw z``, the QR of :func:`householder` and ``sum zw²``.

    Returns ``(t, zw, r, r_inv, effects, rss, column, sum_zw2)``; ``column`` as in
    :func:`householder`. The candidates' PRESS is left to the caller
    (``points.candidate_sums``, called from Python): a kernel with reassociated sums
    compiled into another kernel ran with other roundings once that caller was loaded
    from numba's cache than when it was compiled in the process, so PRESS changed in its
    last digits between processes.
    """
    n = u.size
    t = np.empty(n)
    for i in range(n):
        t[i] = (u[i] - shift) / scale
    zw = z if sw.size == 0 else z * sw
    r, r_inv, effects, rss, column = householder(t, sw, zw, first, p, tol)
    total = 0.0
    for i in range(n):
        total += zw[i] * zw[i]
    return t, zw, r, r_inv, effects, rss, column, total


@numba.njit(cache=True, nogil=True, error_model="numpy")
def householder(t, sw, zw, first, p, tol):
    """float64 Householder QR of the design of ``p`` columns and the response.

    Returns ``(r, r_inv, effects, rss, column)``: ``r`` (p x p) upper
    triangular (diagonal signs as they come), its inverse, ``effects = Q'zw``,
    the residual sum of squares, and ``column = -1`` — or the first column
    whose part orthogonal to the earlier ones is below ``tol`` times its norm
    (then the rest is undefined).
    """
    n = t.size
    a = np.empty((p + 1, n))
    design_rows(t, sw, 0, n, first, p, a)
    a[p] = zw
    r = np.zeros((p, p))
    effects = np.zeros(p)
    if p > n:
        return r, r, effects, np.nan, n
    norms = np.empty(p)
    for k in range(p):
        norms[k] = np.sqrt(np.dot(a[k], a[k]))
    v = np.empty(n)
    for k in range(p):
        x0 = a[k, k]
        normx = np.sqrt(np.dot(a[k, k:], a[k, k:]))
        if not normx > tol * norms[k]:
            return r, r, effects, np.nan, k
        alpha = normx if x0 >= 0 else -normx
        v[k:] = a[k, k:]
        v[k] = x0 + alpha
        scale = 1 / (alpha * v[k])  # 2 / (v'v), since v'v = 2 alpha (x0 + alpha)
        for row in range(k, p + 1):
            w = np.dot(a[row, k:], v[k:]) * scale
            for i in range(k, n):
                a[row, i] -= w * v[i]
    for k in range(p):
        for j in range(k, p):
            r[k, j] = a[j, k]
        effects[k] = a[p, k]
    tail = a[p, p:]
    return r, upper_inverse(r), effects, np.dot(tail, tail), -1


@numba.njit(cache=True, nogil=True, error_model="numpy")
def upper_inverse(r):
    """Inverse of an upper-triangular matrix by back substitution, row by row
    (the operations of ``service.core.polynomial.qr.triangular_inverse``)."""
    p = r.shape[0]
    inv = np.zeros_like(r)
    for i in range(p - 1, -1, -1):
        for j in range(i, p):
            acc = 1.0 if i == j else 0.0
            for k in range(i + 1, j + 1):
                acc -= r[i, k] * inv[k, j]
            inv[i, j] = acc / r[i, i]
    return inv


@numba.njit(cache=True, nogil=True, error_model="numpy")
def float64_loss(r, r_inv, coef, tm):
    """Estimated relative error of float64 basis and raw coefficients (and variances).

    ``EPS * cond * gain`` with ``cond = ||R||_F ||R^-1||_F`` (a bound on the
    condition number of R) and ``gain`` the largest of ``(|T| |b|)_j / |(T b)_j|``
    and ``(|T| |C| |T|')_jj / (T C T')_jj``, ``C = R^-1 R^-T``: how much the
    conversion ``raw = T b`` amplifies relative errors of ``b`` and ``C``
    (1 when nothing cancels; inf when a raw value or variance is zero, NaN
    counts as inf).
    """
    p = r.shape[0]
    fr = 0.0
    fi = 0.0
    for i in range(p):
        for j in range(p):
            fr += r[i, j] * r[i, j]
            fi += r_inv[i, j] * r_inv[i, j]
    c = r_inv @ r_inv.T
    gain = 1.0
    for j in range(p):
        num = 0.0
        den = 0.0
        num_c = 0.0
        den_c = 0.0
        for k in range(p):
            num += abs(tm[j, k] * coef[k])
            den += tm[j, k] * coef[k]
            for m in range(p):
                num_c += abs(tm[j, k] * c[k, m] * tm[j, m])
                den_c += tm[j, k] * c[k, m] * tm[j, m]
        g = max(num / abs(den), num_c / abs(den_c))
        if not g <= gain:  # NaN or larger
            gain = g if g == g else np.inf
    return np.finfo(np.float64).eps * np.sqrt(fr * fi) * gain


@numba.njit(cache=True, nogil=True, error_model="numpy")
def conditions(r, tm):
    """2-norm condition numbers of the scaled-basis R and of the raw-power design.

    The raw one is taken with unit-norm columns (the usual scaled condition
    number): ``R T^-1`` (``T`` upper triangular, solved by substitution) is the
    R factor of the raw design. It is inf when ``T`` is empty (conversion out
    of the double range) or ``R T^-1`` is not finite. A zero smallest singular
    value gives inf.
    """
    basis = _condition(r)
    if tm.size == 0:
        return basis, np.inf
    p = r.shape[0]
    rr = np.zeros((p, p))
    for i in range(p):  # row i of R T^-1: x T = r_i, forward over the columns of T
        for j in range(p):
            acc = r[i, j]
            for k in range(j):
                acc -= rr[i, k] * tm[k, j]
            rr[i, j] = acc / tm[j, j]
    for j in range(p):
        norm = np.sqrt(np.sum(rr[:, j] * rr[:, j]))
        rr[:, j] /= norm
    if not np.all(np.isfinite(rr)):
        return basis, np.inf
    return basis, _condition(rr)


@numba.njit(cache=True, nogil=True, error_model="numpy")
def _condition(a):
    """Largest over smallest singular value of a small square matrix (inf when singular).

    One-sided Jacobi (Hestenes): plane rotations make the columns orthogonal;
    the singular values are then the column norms, each to high relative
    accuracy. Sweeps stop when no pair is further from orthogonal than
    ``eps`` (at most 60 sweeps).
    """
    a = a.copy()
    m, n = a.shape
    eps = np.finfo(np.float64).eps
    for _ in range(60):
        rotated = False
        for i in range(n - 1):
            for j in range(i + 1, n):
                alpha = 0.0
                beta = 0.0
                gamma = 0.0
                for k in range(m):
                    alpha += a[k, i] * a[k, i]
                    beta += a[k, j] * a[k, j]
                    gamma += a[k, i] * a[k, j]
                if alpha == 0.0 or beta == 0.0 or abs(gamma) <= eps * np.sqrt(alpha * beta):
                    continue
                rotated = True
                zeta = (beta - alpha) / (2.0 * gamma)
                t = (1.0 if zeta >= 0 else -1.0) / (abs(zeta) + np.sqrt(1.0 + zeta * zeta))
                c = 1.0 / np.sqrt(1.0 + t * t)
                s = c * t
                for k in range(m):
                    ai, aj = a[k, i], a[k, j]
                    a[k, i] = c * ai - s * aj
                    a[k, j] = s * ai + c * aj
        if not rotated:
            break
    top, low = 0.0, np.inf
    for j in range(n):
        norm = np.sqrt(np.sum(a[:, j] * a[:, j]))
        top = max(top, norm)
        low = min(low, norm)
    return top / low if low > 0 else np.inf
