"""One QR of the largest candidate design; every nested candidate is read off it.

Because the columns enter in order (``t^0, t^1, ...``), the fit of degree
``k`` uses the leading ``p_k`` columns: its R factor is the leading block of
R (and its inverse the leading block of R^-1), its effects the leading
effects, and its residual sum of squares the full model's plus the squares
of the effects it leaves out.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from service.core import design, qr
from service.core.errors import DesignError

EPS = np.finfo(float).eps
# A residual norm below this fraction of ||y|| is rounding of y itself (a few ulps per point):
# the fit is exact. NIST StRD Wampler2 (decimal data, exact quintic) sits at 0.12 eps.
EXACT_FIT_RTOL = 8 * EPS
SHORT_ROWS = 2048  # up to this many points, candidate sums are formed in whole blocks


@dataclass(frozen=True, slots=True)
class Decomposition:
    """The weighted QR of the design up to ``max_degree`` (internal)."""

    intercept: bool
    max_degree: int
    shift: float
    scale: float
    t: np.ndarray            # float64 scaled x of the used points
    sqrt_w: np.ndarray | None
    zw: np.ndarray           # sqrt(w) * response on the fitting scale
    r: np.ndarray            # (P, P) R, extended precision (float64 on long series)
    r_inv: np.ndarray        # (P, P) R^-1, same dtype
    effects: np.ndarray      # (P,) Q'zw, same dtype
    rss_full: float          # residual SS of the largest model
    q: np.ndarray            # (P, n) float64 orthonormal rows (thin Q transposed)
    sum_zw2: float           # uncentred total SS (weighted)

    def p(self, degree: int) -> int:
        """Number of coefficients of the candidate of this degree."""
        return degree + (1 if self.intercept else 0)

    def rss(self, degree: int) -> float:
        """Residual SS of the candidate of this degree (exact fit -> 0.0)."""
        rest = self.effects[self.p(degree):]
        value = self.rss_full + float(rest @ rest)
        return 0.0 if value <= (EXACT_FIT_RTOL ** 2) * self.sum_zw2 else value

    def cumulative(self, degrees) -> tuple[np.ndarray, np.ndarray]:
        """Hat diagonals and weighted residuals of the candidates (len(degrees) x n).

        Running sums go straight into the output rows (a long series
        page-faults on every fresh array); the additions are the same, in the
        same order, as ``h += q_j * q_j`` and ``f += e_j q_j``, and each
        residual row is ``zw - f``.
        """
        want = {self.p(d) - 1: i for i, d in enumerate(degrees)}
        n = self.q.shape[1]
        top = max(want) + 1
        if n <= SHORT_ROWS:  # a few numpy calls over the whole block (accumulate is sequential)
            rows = sorted(want)  # ascending degrees: row i of the output is degrees[i]
            q = self.q[:top]
            lev = np.add.accumulate(q * q, axis=0)[rows]
            f = np.add.accumulate(q * self.effects[:top, None].astype(float), axis=0)[rows]
            return lev, np.subtract(self.zw, f, out=f)
        lev = np.empty((len(want), n))
        res = np.empty((len(want), n))
        eff = self.effects.astype(float).tolist()
        tmp, f = np.empty(n), np.empty(n)
        spare = np.empty(n) if len(want) < max(want) + 1 else None
        h_prev = None
        for j in range(max(want) + 1):
            row = self.q[j]
            i = want.get(j)
            h_out = lev[i] if i is not None else spare
            np.multiply(row, row, out=tmp)
            if h_prev is None:
                h_out[...] = tmp
            else:
                np.add(h_prev, tmp, out=h_out)
            h_prev = h_out
            if j == 0:
                np.multiply(row, eff[0], out=f)
            else:
                np.multiply(row, eff[j], out=tmp)
                f += tmp
            if i is not None:
                np.subtract(self.zw, f, out=res[i])
        return lev, res


def _sumsq(v: np.ndarray) -> float:
    return qr.dot(v, v)


def decompose(u: np.ndarray, z: np.ndarray, w: np.ndarray | None, max_degree: int,
              intercept: bool, field: str = "model.max_degree",
              bounds: tuple[float, float] | None = None) -> Decomposition:
    """Scale x, build the weighted design up to ``max_degree``, and factor it.

    ``bounds`` is ``(u.min(), u.max())`` when the caller already has it.

    Raises
    ------
    DesignError
        When the columns are numerically dependent even though x has enough
        distinct values (x extremely clustered relative to its range).
    """
    shift, scale = design.scaling(u, intercept, bounds)
    n = u.size
    sqrt_w = None if w is None else np.sqrt(w)
    zw = z if sqrt_w is None else z * sqrt_w
    t64 = design.to_t(u, shift, scale)
    p = max_degree + (1 if intercept else 0)
    try:
        if n > qr.EXTENDED_MAX_ROWS:
            v = design.basis_rows(t64, max_degree, intercept, sqrt_w)
            got = qr.cholesky_qr2(v)
            if got is not None:
                r, q = got
                effects = np.einsum("ij,j->i", q, zw)
                resid = zw.copy()
                tmp = np.empty_like(resid)
                for e_j, row in zip(effects.tolist(), q, strict=True):
                    np.multiply(row, e_j, out=tmp)
                    resid -= tmp
                return Decomposition(intercept, max_degree, shift, scale, t64, sqrt_w, zw, r,
                                     qr.triangular_inverse(r), effects, _sumsq(resid),
                                     q, _sumsq(zw))
        t_ext = design.to_t(u, shift, scale, qr.EXTENDED)
        sw = None if sqrt_w is None else sqrt_w.astype(qr.EXTENDED)
        a = np.empty((p + 1, n), dtype=qr.EXTENDED)
        design.basis_rows(t_ext, max_degree, intercept, sw, out=a[:p])
        a[p] = zw
        v64 = a[:p].astype(float)
        r, effects, rss = qr.householder(a, p)
    except qr.RankDeficient as exc:
        raise DesignError(
            f"The design for degree {max_degree} is numerically rank deficient (column "
            f"{exc.column} depends on the earlier ones): the x values are too clustered for "
            "this many powers.", field=field,
            fix=f"Use a degree below {exc.column}, or spread the x values more evenly.") from None
    r_inv = qr.triangular_inverse(r)
    q = qr.rows_times_upper(r_inv.astype(float), v64)
    return Decomposition(intercept, max_degree, shift, scale, t64, sqrt_w, zw, r, r_inv,
                         effects, rss, q, _sumsq(zw))
