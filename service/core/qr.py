"""Householder QR of a tall, narrow design augmented with the response.

The design has at most 13 columns, so a column-by-column Householder
triangularisation vectorized over the rows is cheap. It is carried out in
numpy ``longdouble`` (80-bit extended precision on x86-64, eps ~1.1e-19)
for series up to :data:`EXTENDED_MAX_ROWS` points: that keeps about three
more digits than float64, which the conversion of coefficients back to raw
powers of x needs (NIST StRD Filip and Wampler1 lose 5-7 digits there).
Longer series use LAPACK's float64 Householder QR (scipy) for speed.
"""

from __future__ import annotations

import numpy as np
import scipy.linalg

EXTENDED = np.longdouble
EXTENDED_MAX_ROWS = 20_000  # above this, float64 LAPACK (speed); see module docstring


class RankDeficient(ArithmeticError):
    """Column ``column`` is (numerically) a combination of the earlier ones."""

    def __init__(self, column: int) -> None:
        super().__init__(column)
        self.column = column


def triangularize(a: np.ndarray, p: int, *, tol: float = 1e-13) -> tuple[np.ndarray, np.ndarray]:
    """Reduce the first ``p`` columns of ``a`` (n x q, q > p) to upper-triangular form.

    Parameters
    ----------
    a : ndarray (n, q)
        Design columns followed by one or more response columns; overwritten
        when its dtype is the working dtype.
    p : int
        Number of design columns.
    tol : float
        A column whose part orthogonal to the earlier columns is below
        ``tol`` times its own norm counts as rank deficient.

    Returns
    -------
    r : ndarray (p, p)
        Upper-triangular factor (diagonal signs as they come).
    qta : ndarray (n, q - p)
        ``Q' a[:, p:]``: the first ``p`` rows are the effects, the rest
        carry the residual sum of squares.

    Raises
    ------
    RankDeficient
        With the index of the first dependent column.
    """
    n = a.shape[0]
    if n > EXTENDED_MAX_ROWS:
        return _lapack(a, p, tol)
    a = np.array(a, dtype=EXTENDED)
    norms = np.sqrt(np.einsum("ij,ij->j", a[:, :p], a[:, :p]))
    for k in range(min(p, n)):
        col = a[k:, k]
        normx = np.sqrt(col @ col)
        if not normx > tol * norms[k]:
            raise RankDeficient(k)
        v = col.copy()
        v[0] += normx if col[0] >= 0 else -normx
        scale = 2 / (v @ v)
        block = a[k:, k:]
        block -= np.outer(v, (v @ block) * scale)
    if p > n:
        raise RankDeficient(n)
    return np.triu(a[:p, :p]), a[:, p:]


def _lapack(a: np.ndarray, p: int, tol: float) -> tuple[np.ndarray, np.ndarray]:
    """float64 path for long series: LAPACK Householder QR, then Q'(responses)."""
    a = np.asarray(a, dtype=float)
    q, r = scipy.linalg.qr(a[:, :p], mode="economic", check_finite=False)
    norms = np.sqrt(np.einsum("ij,ij->j", a[:, :p], a[:, :p]))
    diag = np.abs(np.diag(r))
    bad = np.flatnonzero(~(diag > tol * norms))
    if bad.size:
        raise RankDeficient(int(bad[0]))
    rhs = a[:, p:]
    effects = q.T @ rhs
    rest = rhs - q @ effects
    # Rows p.. of Q'rhs are not formed; a vector with the same norm carries the residual SS.
    tail = np.zeros((a.shape[0] - p, rhs.shape[1]))
    tail[0] = np.sqrt(np.einsum("ij,ij->j", rest, rest))
    return r, np.vstack([effects, tail])
