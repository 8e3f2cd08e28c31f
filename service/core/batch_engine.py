"""Vectorized least-squares polynomial fits of many series of one (padded) length.

A block holds ``G`` series as rows of ``(G, L)`` arrays. Short series are
padded with weight 0, which removes the padded points from every sum, so
one block can hold series of different lengths.

Numerics. Each series' x is mapped onto [-1, 1] (``t = (u - shift) / scale``);
then the weighted discrete orthonormal polynomials ``q_0 .. q_d`` of that
series are built by the Stieltjes three-term recurrence, vectorized across
rows, and each new vector is re-orthogonalized against every earlier one
(a second classical Gram-Schmidt sweep: "twice is enough"). The sweep is not
optional: on designs with an outlying x the bare recurrence loses
orthogonality and digits (1e-5 relative at degree 4 with condition number
~700; with the sweep 1e-12). The ``q_k`` are the columns of the thin-QR ``Q``
factor of the scaled design ``sqrt(w) * t**k``; their polynomial
coefficients give ``R^-1``. The residual sum of squares of every nested degree
is the largest model's (a sum of squared residuals) plus the squares of the
effects it leaves out, never a difference of large numbers. Normal equations
on raw powers are never formed.

References: Golub & Van Loan, *Matrix Computations*, 4th ed., sec. 5.2
(Gram-Schmidt, re-orthogonalization); Forsythe (1957), *J. SIAM* 5, 74-88
(fitting with discrete orthogonal polynomials via the three-term recurrence).
"""

from __future__ import annotations

import numpy as np
from scipy import special


def _dot(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    return np.einsum("gn,gn->g", a, b)


def scale_x(u: np.ndarray, valid: np.ndarray | None, intercept: bool,
            n: np.ndarray | None = None) -> tuple[np.ndarray, ...]:
    """Per-row shift and scale mapping the valid x of each row onto [-1, 1].

    Same float operations as :func:`service.core.design.scaling`: with an
    intercept the range maps onto [-1, 1]; without one the shift is 0 and the
    scale is ``max |u|`` (a shift would add a constant term). ``valid`` None
    means every entry is real. ``n`` (points per row) says the rows are in
    increasing order, so the range is read off the ends. Returns
    ``(t, shift, scale)``; ``t`` is 0 where padded.
    """
    if n is not None:
        small, big = u[:, 0], u[np.arange(u.shape[0]), n.astype(np.int64) - 1]
    elif valid is None:
        big, small = u.max(axis=1), u.min(axis=1)
    else:
        big = np.where(valid, u, -np.inf).max(axis=1)
        small = np.where(valid, u, np.inf).min(axis=1)
    if intercept:
        shift = 0.5 * small + 0.5 * big
        scale = 0.5 * big - 0.5 * small
    else:
        shift = np.zeros_like(big)
        scale = np.maximum(np.abs(big), np.abs(small))
    scale = np.where(scale > 0, scale, 1.0)
    t = u - shift[:, None]
    t /= scale[:, None]
    if valid is not None:
        t *= valid
    return t, shift, scale


def orthonormal_basis(t: np.ndarray, s: np.ndarray | None, p: int, intercept: bool):
    """Orthonormal vectors ``q_k = s * P_k(t)`` for ``k < p`` and their power coefficients.

    Parameters
    ----------
    t : ndarray (G, L)
        Scaled x (0 where padded).
    s : ndarray (G, L) or None
        Square roots of the weights (0 where padded); None means all ones.
    p : int
        Number of columns (degree + 1 with intercept, degree without).
    intercept : bool
        Basis starts at the constant (True) or at ``t`` (False).

    Returns
    -------
    q : ndarray (p, G, L)
    coef : ndarray (G, p, p)
        ``coef[:, m, k]`` is the coefficient of ``t**(m + start)`` in ``P_k``
        (``start`` = 0 with intercept, 1 without): ``coef`` equals ``R^-1``.
    """
    G, L = t.shape
    q = np.empty((p, G, L))
    ck = np.zeros((p, G, p))                 # ck[k] = power coefficients of P_k (contiguous)
    tmp = np.empty((G, L))
    if intercept:
        v = np.ones((G, L)) if s is None else s
    else:
        v = t if s is None else s * t
    norm = np.sqrt(_dot(v, v))
    np.multiply(v, (1.0 / norm)[:, None], out=q[0])
    ck[0, :, 0] = 1.0 / norm
    beta = None
    first = 0
    if intercept and s is None and p > 1:
        # q_0 is constant 1/sqrt(L): q_1 is the centred t, normalized (3 passes, not 7)
        alpha = t.mean(axis=1)
        v = q[1]
        np.subtract(t, alpha[:, None], out=v)
        norm = np.sqrt(_dot(v, v))
        v *= (1.0 / norm)[:, None]
        ck[1, :, 1] = 1.0 / norm
        ck[1, :, 0] = -alpha / norm
        beta = norm / np.sqrt(L)   # = q_1' t q_0, the recurrence's next beta
        first = 1
    for k in range(first, p - 1):
        # Stieltjes: t q_k = beta_{k+1} q_{k+1} + alpha_k q_k + beta_k q_{k-1}
        v = q[k + 1]
        np.multiply(t, q[k], out=v)
        alpha = _dot(v, q[k])
        v -= np.multiply(q[k], alpha[:, None], out=tmp)
        c = ck[k + 1]
        c[:, 1:] = ck[k, :, :-1]
        c -= alpha[:, None] * ck[k]
        if k > 0:
            v -= np.multiply(q[k - 1], beta[:, None], out=tmp)
            c -= beta[:, None] * ck[k - 1]
        # second classical Gram-Schmidt sweep against every earlier vector
        h = np.einsum("kgn,gn->gk", q[:k + 1], v)
        v -= np.einsum("gk,kgn->gn", h, q[:k + 1])
        c -= np.einsum("gk,kgm->gm", h, ck[:k + 1])
        beta = np.sqrt(_dot(v, v))
        inv = (1.0 / beta)[:, None]
        v *= inv
        c *= inv
    return q, np.ascontiguousarray(ck.transpose(1, 2, 0))


def effects(q: np.ndarray, zw: np.ndarray):
    """Effects ``b_k = q_k' zw`` (G, p) and the residual after all p columns (G, L)."""
    b = np.einsum("kgn,gn->gk", q, zw)
    res = zw - np.einsum("gk,kgn->gn", b, q)
    return b, res


def raw_power_matrix(shift: np.ndarray, scale: np.ndarray, p: int, start: int) -> np.ndarray:
    """Matrix ``T (G, p, p)`` with ``a_raw = T @ a_t`` for powers ``start .. start+p-1``.

    ``t = (u - shift) / scale`` so ``t**m = sum_j C(m, j) u**j (-shift)**(m-j) / scale**m``
    (as :func:`service.core.design.conversion`, here in float64).
    """
    m = np.arange(start, start + p)
    binom = special.comb(m[None, :], m[:, None])            # C(m, j), zero for j > m
    gap = np.maximum(m[None, :] - m[:, None], 0)
    top = int(m[-1]) + 1
    neg = np.cumprod(np.column_stack([np.ones_like(shift)] + [-shift] * (top - 1)), axis=1)
    inv = np.cumprod(np.column_stack([np.ones_like(scale)] + [1.0 / scale] * (top - 1)), axis=1)
    return binom[None] * neg[:, gap] * inv[:, None, m]


def criteria(rss, ss_model, n, k, c, sum_log_w):
    """Whole-fit measures of candidates with ``k`` coefficients (arrays broadcast).

    Same conventions as :mod:`service.core.summary`: weighted sums of squares,
    centred total SS with an intercept (``c`` = 1), uncentred without (``c`` = 0),
    Gaussian log-likelihood at the ML variance, AIC = -2 llf + 2k, BIC = -2 llf + k log n,
    AICc = AIC + 2k(k+1)/(n-k-1); ``sum_log_w`` is ``sum(log w)`` (0 unweighted).
    Exact fits (rss == 0) have undefined criteria.
    """
    df = n - k
    tss = ss_model + rss
    with np.errstate(divide="ignore", invalid="ignore"):
        r2 = np.where(tss > 0, ss_model / tss, np.nan)
        adj = np.where((df > 0) & (tss > 0), 1 - (1 - r2) * (n - c) / df, np.nan)
        sigma = np.where(df > 0, np.sqrt(rss / df), np.nan)
        m2llf = np.where(rss > 0, n * (np.log(2 * np.pi) + np.log(rss / n) + 1) - sum_log_w,
                         np.nan)
        aic = m2llf + 2 * k
        bic = m2llf + k * np.log(n)
        aicc = np.where(n - k - 1 > 0, aic + 2 * k * (k + 1) / (n - k - 1), np.nan)
    return {"df_residual": df, "rss": rss, "sigma": sigma, "r_squared": r2,
            "adj_r_squared": adj, "aic": aic, "aicc": aicc, "bic": bic}


def f_last(b_last, rss, df, exact, with_p=True):
    """Sequential F of the last power (1 df) over the model's residual mean square, and p.

    The p-values are the costly part; ``with_p=False`` returns them as NaN.
    """
    with np.errstate(divide="ignore", invalid="ignore"):
        ok = (df > 0) & (rss > 0) & ~exact
        f = np.where(ok, b_last ** 2 / (rss / df), np.nan)
        if not with_p:
            return f, np.full(f.shape, np.nan)
        pv = special.fdtrc(1, np.maximum(df, 1), f)
    return f, np.where(ok, pv, np.nan)
