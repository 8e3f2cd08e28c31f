"""Orthogonal triangularisation of a short, wide design (one row per power).

The design is stored transposed, ``a[k]`` being the k-th column (power of
t) over all points, with the response as the last row. It has at most 13
columns, so two small kernels cover every case:

* :func:`householder` — column-by-column Householder reflections vectorized
  over the points, in the dtype of ``a``. The fit runs it in numpy
  ``longdouble`` (80-bit extended on x86-64, eps ~1.1e-19) for series of up
  to :data:`EXTENDED_MAX_ROWS` points: the conversion of coefficients back
  to raw powers of x cancels heavily (NIST StRD Filip and Wampler1 lose 5-7
  digits there), so the basis coefficients must carry extra digits.
* :func:`cholesky_factor` — the Cholesky step of float64 CholeskyQR2
  (Fukaya et al., 2014) for longer series: two Gram/Cholesky passes
  (``kernels_qr.gram``) give an orthonormal Q to working precision while the
  scaled basis is well conditioned (condition < 1e7), which the [-1, 1]
  mapping ensures for any sensible x; worse designs fall back to a float64
  Householder QR.

Short series are factored in float64 first (``kernels_qr.householder``);
the fit repeats the factorization with :func:`householder` in longdouble
when the float64 answer could lose digits.
"""

from __future__ import annotations

from functools import lru_cache

import numpy as np

try:  # numpy's own LAPACK kernels without the np.linalg wrapper (~3 us a call less)
    from numpy.linalg import _umath_linalg as _kernels
except ImportError:  # pragma: no cover - other numpy layout
    _kernels = None

EXTENDED = np.longdouble
# False where longdouble is plain float64 (e.g. some ARM and Windows builds): ~3 digits fewer
EXTENDED_IS_WIDER = bool(np.finfo(EXTENDED).eps < np.finfo(float).eps)
EXTENDED_MAX_ROWS = 5_000  # above this, float64 CholeskyQR2 only (speed); see module docstring
CHOLQR_MAX_COND = 1e7
ONE_PASS_COND = 1e2  # eps * cond^2 ~ 2e-12


class RankDeficient(ArithmeticError):
    """Column ``column`` is (numerically) a combination of the earlier ones."""

    def __init__(self, column: int) -> None:
        super().__init__(column)
        self.column = column


def householder(a: np.ndarray, p: int, tol: float = 1e-13) -> tuple[np.ndarray, np.ndarray,
                                                                      float]:
    """Triangularise the first ``p`` rows of ``a`` (q x n, q = p + 1) in place.

    Returns
    -------
    r : ndarray (p, p)
        Upper-triangular factor, dtype of ``a`` (diagonal signs as they come).
    effects : ndarray (p,)
        ``Q'y`` for the last row ``y`` of ``a``.
    rss : float
        Squared norm of the part of ``y`` orthogonal to the design.

    Raises
    ------
    RankDeficient
        When a column's part orthogonal to the earlier ones is below ``tol``
        times its norm.
    """
    n = a.shape[1]
    if p > n:
        raise RankDeficient(n)
    norms = np.sqrt(np.einsum("ij,ij->i", a[:p], a[:p]))
    for k in range(p):
        col = a[k, k:]
        x0 = col[0]
        normx = np.sqrt(col @ col)
        if not normx > tol * norms[k]:
            raise RankDeficient(k)
        alpha = normx if x0 >= 0 else -normx
        v = col.copy()
        v[0] = x0 + alpha
        block = a[k:, k:]
        w = block @ v
        w *= 1 / (alpha * v[0])  # 2 / (v'v), since v'v = 2 alpha (x0 + alpha)
        block -= np.multiply.outer(w, v)
    r = a[:p, :p].T * _upper(p)
    tail = a[p, p:]
    return r, a[p, :p].copy(), float(tail @ tail)


@lru_cache(maxsize=16)
def _upper(p: int) -> np.ndarray:
    """0/1 mask of the upper triangle (read-only)."""
    mask = np.triu(np.ones((p, p)))
    mask.setflags(write=False)
    return mask


def cholesky_factor(g: np.ndarray, tol: float) -> np.ndarray | None:
    """Upper-triangular ``r`` with ``r'r = g`` (a small Gram matrix), or None when ``g`` is
    not numerically positive definite (a diagonal of ``r`` below ``tol sqrt(g_jj)``)."""
    try:
        r = np.linalg.cholesky(g).T
    except np.linalg.LinAlgError:
        return None
    if not np.all(np.diag(r) > tol * np.sqrt(np.diag(g))):
        return None
    return r


SHORT = 4096  # vectors up to this length use BLAS (lower call overhead); longer ones einsum


def dot(a: np.ndarray, b: np.ndarray) -> float:
    """Dot product of two 1-D float arrays: BLAS when short, einsum (no threads) when long."""
    return float(a @ b) if a.size <= SHORT else float(np.einsum("i,i->", a, b))


def triangular_inverse(r: np.ndarray) -> np.ndarray:
    """Inverse of an upper-triangular matrix by back substitution in its own dtype."""
    p = r.shape[0]
    inv = np.zeros_like(r)
    eye = np.eye(p, dtype=r.dtype)
    for i in range(p - 1, -1, -1):
        inv[i] = (eye[i] - r[i, i + 1:] @ inv[i + 1:]) / r[i, i]
    return inv


def solve(a: np.ndarray, b: np.ndarray) -> np.ndarray | None:
    """``a^-1 b`` for small float64 matrices (``np.linalg.solve``'s kernel); None if singular.

    Call inside ``np.errstate(all="ignore")``.
    """
    if _kernels is not None:
        out = _kernels.solve(a, b, signature="dd->d")
        return out if not np.isnan(out).all() else None
    try:
        return np.linalg.solve(a, b)
    except np.linalg.LinAlgError:
        return None
