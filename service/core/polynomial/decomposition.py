"""One QR of the largest candidate design; every nested candidate is read off it.

Because the columns enter in order (``t^0, t^1, ...``), the fit of degree
``k`` uses the leading ``p_k`` columns: its R factor is the leading block of
R (and its inverse the leading block of R^-1), its effects the leading
effects, and its residual sum of squares the full model's plus the squares
of the effects it leaves out.

Precision: the factorization runs in float64 (compiled Householder up to
:data:`service.core.polynomial.qr.EXTENDED_MAX_ROWS` points, CholeskyQR2 from two Gram
passes above) unless ``extended=True`` asks for the numpy ``longdouble``
Householder of :mod:`service.core.polynomial.qr` — which the fit does whenever the
float64 answer could lose digits (see ``polynomial.py``).
"""

from __future__ import annotations

from typing import NamedTuple

import numpy as np

from service.core.errors import DesignError
from service.core.polynomial import design, qr
from service.core.polynomial.compiled import points as kernels_points
from service.core.polynomial.compiled import qr as kernels_qr

EPS = np.finfo(float).eps
# A residual norm below this fraction of ||y|| is rounding of y itself (a few ulps per point):
# the fit is exact. NIST StRD Wampler2 (decimal data, exact quintic) sits at 0.12 eps.
EXACT_FIT_RTOL = 8 * EPS
LEVERAGE_ONE = 1 - 1e-10  # h_i above this: the leave-one-out residual is undefined
RANK_TOL = 1e-13
_NONE = np.empty(0)
_NO_RINV = np.empty((0, 0))


class Decomposition(NamedTuple):
    """The weighted QR of the design up to ``max_degree`` and the candidates' sums (internal)."""

    intercept: bool
    max_degree: int
    shift: float
    scale: float
    t: np.ndarray            # float64 scaled x of the used points
    sqrt_w: np.ndarray | None
    zw: np.ndarray           # sqrt(w) * response on the fitting scale
    r: np.ndarray            # (P, P) R: longdouble when ``extended``, else float64
    r_inv: np.ndarray        # (P, P) R^-1, same dtype
    r_inv64: np.ndarray      # (P, P) R^-1 rounded to float64 (the per-point loops)
    effects: np.ndarray      # (P,) Q'zw, same dtype as r
    effects64: np.ndarray    # (P,) float64
    rss_full: float          # residual SS of the largest model
    sum_zw2: float           # uncentred total SS (weighted)
    press: np.ndarray        # (candidates,) PRESS of each candidate (NaN at leverage one)
    extended: bool

    def p(self, degree: int) -> int:
        """Number of coefficients of the candidate of this degree."""
        return degree + (1 if self.intercept else 0)

    @property
    def first(self) -> int:
        """Exponent of the first column (0 with an intercept)."""
        return 0 if self.intercept else 1

    @property
    def weights(self) -> np.ndarray:
        """``sqrt_w`` for the compiled loops (empty when unweighted)."""
        return _NONE if self.sqrt_w is None else self.sqrt_w


def decompose(u: np.ndarray, z: np.ndarray, w: np.ndarray | None, degrees: list[int],
              intercept: bool, field: str = "model.max_degree",
              bounds: tuple[float, float] | None = None,
              extended: bool = False) -> Decomposition:
    """Scale x, factor the weighted design up to ``max(degrees)``, and sum the candidates.

    ``bounds`` is ``(u.min(), u.max())`` when the caller already has it;
    ``extended`` asks for the longdouble factorization (series of at most
    ``qr.EXTENDED_MAX_ROWS`` points).

    Raises
    ------
    DesignError
        When the columns are numerically dependent even though x has enough
        distinct values (x extremely clustered relative to its range).
    """
    max_degree = degrees[-1]
    shift, scale = design.scaling(u, intercept, bounds)
    n = u.size
    sqrt_w = None if w is None else np.sqrt(w)
    p = max_degree + (1 if intercept else 0)
    first = 0 if intercept else 1
    sw = _NONE if sqrt_w is None else sqrt_w
    ps = np.array(degrees, dtype=np.int64) + (1 if intercept else 0)  # coefficients
    try:
        if n <= qr.EXTENDED_MAX_ROWS and not (extended and qr.EXTENDED_IS_WIDER):
            t64, zw, r, r_inv, effects, rss, column, sum_zw2 = kernels_qr.factor_short(
                u, shift, scale, sw, z, first, p, RANK_TOL)
            if column >= 0:
                raise qr.RankDeficient(column)
            press = kernels_points.candidate_sums(t64, sw, zw, first, r_inv, effects, ps,
                                                  LEVERAGE_ONE)[0]
            return Decomposition(intercept, max_degree, shift, scale, t64, sqrt_w, zw, r, r_inv,
                                 r_inv, effects, effects, float(rss), float(sum_zw2),
                                 press, False)
        zw = z if sqrt_w is None else z * sqrt_w
        t64 = design.to_t(u, shift, scale)
        rss = np.nan
        r_inv = None
        if n > qr.EXTENDED_MAX_ROWS:
            got = _cholesky_qr2(t64, sw, zw, first, p)
            if got is None:  # too ill-conditioned for Gram passes: float64 Householder
                r, effects, rss, r_inv = _householder64(t64, sw, zw, first, p)
            else:
                r, effects, rss = got
        else:
            t_ext = design.to_t(u, shift, scale, qr.EXTENDED)
            sw_ext = None if sqrt_w is None else sqrt_w.astype(qr.EXTENDED)
            a = np.empty((p + 1, n), dtype=qr.EXTENDED)
            design.basis_rows(t_ext, max_degree, intercept, sw_ext, out=a[:p])
            a[p] = zw
            r, effects, rss = qr.householder(a, p, RANK_TOL)
    except qr.RankDeficient as exc:
        raise DesignError(
            f"The design for degree {max_degree} is numerically rank deficient (column "
            f"{exc.column} depends on the earlier ones): the x values are too clustered for "
            "this many powers.", field=field,
            fix=f"Use a degree below {exc.column}, or spread the x values more evenly.") from None
    if r_inv is None:
        r_inv = qr.triangular_inverse(r)
    r_inv64 = np.ascontiguousarray(r_inv, dtype=float)
    effects64 = np.ascontiguousarray(effects, dtype=float)
    press, _, rss_pass = kernels_points.candidate_sums(t64, sw, zw, first, r_inv64, effects64,
                                                       ps, LEVERAGE_ONE)
    if np.isnan(rss):  # Gram passes: the residuals are formed in the candidate pass
        rss = rss_pass
    return Decomposition(intercept, max_degree, shift, scale, t64, sqrt_w, zw, r, r_inv,
                         r_inv64, effects, effects64, float(rss), qr.dot(zw, zw),
                         press, r.dtype != np.float64)


def _householder64(t, sw, zw, first, p):
    r, r_inv, effects, rss, column = kernels_qr.householder(t, sw, zw, first, p, RANK_TOL)
    if column >= 0:
        raise qr.RankDeficient(column)
    return r, effects, rss, r_inv


def _cholesky_qr2(t, sw, zw, first, p):
    """float64 CholeskyQR2 from Gram passes; ``(r, effects, nan)`` or None when the design
    is too ill-conditioned for it (condition above ``qr.CHOLQR_MAX_COND``).

    The second pass is skipped when the first R is so well conditioned
    (condition below ``qr.ONE_PASS_COND``) that ``Q'Q`` is the identity to ~1e-12.
    """
    g = kernels_qr.gram(t, sw, zw, first, p, _NO_RINV)
    r1 = qr.cholesky_factor(g[:p, :p], RANK_TOL)
    if r1 is None:
        return None
    d = np.abs(np.diag(r1))
    if d.min() * qr.CHOLQR_MAX_COND < d.max():
        return None
    if np.linalg.cond(r1) < qr.ONE_PASS_COND:
        return r1, qr.solve(r1.T, g[p, :p, None])[:, 0], np.nan
    r1_inv = np.ascontiguousarray(qr.triangular_inverse(r1))
    g2 = kernels_qr.gram(t, sw, zw, first, p, r1_inv)
    r2 = qr.cholesky_factor(g2[:p, :p], RANK_TOL)
    if r2 is None:
        return None
    return r2 @ r1, qr.solve(r2.T, g2[p, :p, None])[:, 0], np.nan
