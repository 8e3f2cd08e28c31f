"""One QR of the largest candidate design; every nested candidate is read off it.

Because the columns enter in order (``t^0, t^1, ...``), the fit of degree
``k`` uses the leading ``p_k`` columns: its R factor is the leading block of
R, its effects the leading effects, and its residual sum of squares is the
full model's plus the squares of the effects it leaves out.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from service.core import design, qr
from service.core.errors import DesignError

EPS = np.finfo(float).eps
EXACT_FIT_RTOL = 1e3 * EPS  # residual norm below this fraction of ||y|| counts as exact (rounding)


@dataclass(frozen=True, slots=True)
class Decomposition:
    """The weighted QR of the design up to ``max_degree`` (internal)."""

    intercept: bool
    max_degree: int
    shift: float
    scale: float
    t: np.ndarray            # float64 scaled x of the used points
    sqrt_w: np.ndarray | None
    z: np.ndarray            # response on the fitting scale (unweighted)
    zw: np.ndarray           # sqrt(w) * z
    r: np.ndarray            # (P, P) extended-precision (or float64 on long series) R
    effects: np.ndarray      # (P,) Q'zw, same dtype as r
    rss_full: float          # residual SS of the largest model
    q: np.ndarray            # (n, P) float64 thin Q
    sum_zw2: float           # uncentred total SS (weighted)

    def p(self, degree: int) -> int:
        """Number of coefficients of the candidate of this degree."""
        return degree + (1 if self.intercept else 0)

    def rss(self, degree: int) -> float:
        """Residual SS of the candidate of this degree (exact residual -> 0.0)."""
        p = self.p(degree)
        rest = self.effects[p:]
        value = float(self.rss_full + float(rest @ rest))
        return 0.0 if value <= (EXACT_FIT_RTOL ** 2) * self.sum_zw2 else value

    def r_inverse(self, degree: int) -> np.ndarray:
        """Inverse of the leading R block (extended precision)."""
        p = self.p(degree)
        return _tri_inverse(self.r[:p, :p])

    def basis_coefficients(self, degree: int) -> np.ndarray:
        """Coefficients on powers of ``t`` (extended precision)."""
        p = self.p(degree)
        return self.r_inverse(degree) @ self.effects[:p]


def _tri_inverse(r: np.ndarray) -> np.ndarray:
    """Inverse of an upper-triangular matrix by back substitution in its own dtype."""
    p = r.shape[0]
    inv = np.zeros_like(r)
    eye = np.eye(p, dtype=r.dtype)
    for i in range(p - 1, -1, -1):
        inv[i] = (eye[i] - r[i, i + 1:] @ inv[i + 1:]) / r[i, i]
    return inv


def decompose(u: np.ndarray, z: np.ndarray, w: np.ndarray | None, max_degree: int,
              intercept: bool) -> Decomposition:
    """Scale x, build the weighted design up to ``max_degree``, and factor it.

    Raises
    ------
    DesignError
        When the columns are numerically dependent even though x has enough
        distinct values (extremely clustered x relative to its range).
    """
    shift, scale = design.scaling(u, intercept)
    n = u.size
    dtype = qr.EXTENDED if n <= qr.EXTENDED_MAX_ROWS else float
    t_ext = design.to_t(u, shift, scale, dtype)
    cols = design.basis(t_ext, max_degree, intercept)
    sqrt_w = None if w is None else np.sqrt(w)
    zw = z if sqrt_w is None else z * sqrt_w
    a = np.empty((n, cols.shape[1] + 1), dtype=dtype)
    a[:, :-1] = cols if sqrt_w is None else cols * sqrt_w.astype(dtype)[:, None]
    a[:, -1] = zw
    p = cols.shape[1]
    try:
        r, qta = qr.triangularize(a, p)
    except qr.RankDeficient as exc:
        raise DesignError(
            f"The design for degree {max_degree} is numerically rank deficient (column "
            f"{exc.column} depends on the earlier ones): the x values are too clustered for "
            "this many powers.", field="model.max_degree" if max_degree else "x",
            fix="Lower the degree, or spread the x values more evenly.") from None
    effects = qta[:p, 0]
    tail = qta[p:, 0]
    rss_full = float(tail @ tail)
    rinv = _tri_inverse(r)
    q = (a[:, :p] @ rinv).astype(float)
    return Decomposition(intercept, max_degree, shift, scale, t_ext.astype(float), sqrt_w, z,
                         zw, r, effects, rss_full, q, float(zw @ zw))
