"""Fit, compare and select candidate degrees for one block of same-width series.

Everything is vectorized over the rows of ``(G, L)`` arrays (see
:mod:`service.core.batch_engine` for the numerics). Conventions and the
selection rules are those of :mod:`service.core.summary` and
:mod:`service.core.selection`, so each row gets the answer ``fit_series`` gives.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import special

from service.core import batch_engine as eng
from service.core.decomposition import EXACT_FIT_RTOL  # the one exact-fit cut-off
from service.core.summary import LEVERAGE_ONE  # leave-one-out residual undefined above


@dataclass(frozen=True, slots=True)
class BlockSpec:
    """What to fit in a block: candidate degrees and how to choose among them."""

    min_degree: int
    max_degree: int
    intercept: bool
    select: str          # one of SELECT_METHODS, or "fixed"
    alpha: float
    need_press: bool

    @property
    def c(self) -> int:
        return 1 if self.intercept else 0

    def p(self, degree):
        return degree + self.c


def fit_block(u, z, w, valid, spec: BlockSpec, increasing: bool = False) -> dict:
    """Fit every candidate degree for each row and select one.

    Parameters
    ----------
    u, z : ndarray (G, L)
        x and y on the fitting scale (after transforms); 0 where padded.
    w : ndarray (G, L) or None
        Weights, 0 where padded; None: unweighted and unpadded.
    valid : ndarray of bool (G, L) or None
        True for real points; None when no row is padded.
    spec : BlockSpec
    increasing : bool
        Every row's x is strictly increasing (the range is then read off the ends).

    Returns
    -------
    dict of ndarray
        Candidate tables ``cand_<measure>`` (G, n_candidates); the chosen
        ``degree``; raw-x ``coef`` and ``se`` (G, P) NaN beyond the model's
        terms; chosen-model measures; the chosen model's weighted residuals
        ``resid_w``, leverage ``leverage`` and the basis ``q`` for diagnostics.
    """
    G = u.shape[0]
    n = valid.sum(axis=1).astype(float) if valid is not None else np.full(u.shape[0],
                                                                           float(u.shape[1]))
    t, shift, scale = eng.scale_x(u, None if w is None else valid, spec.intercept,
                                  n if increasing else None)
    s = None if w is None else np.sqrt(w)
    big_p = spec.p(spec.max_degree)
    q, coef = eng.orthonormal_basis(t, s, big_p, spec.intercept)
    zw = z if s is None else s * z
    sum_zw2 = eng._dot(zw, zw)
    if spec.intercept:  # remove the weighted mean first: no cancellation on large offsets
        sw = n if w is None else w.sum(axis=1)
        zbar = (zw.sum(axis=1) if s is None else eng._dot(s, zw)) / sw
        zc = zw - (zbar[:, None] if s is None else zbar[:, None] * s)
        b, res = eng.effects(q[1:], zc)
        b = np.concatenate([(zbar * np.sqrt(sw))[:, None], b], axis=1)
    else:
        b, res = eng.effects(q, zw)
    rss_full = eng._dot(res, res)
    b2 = b * b
    tail = np.cumsum(b2[:, ::-1], axis=1)[:, ::-1]     # tail[:, j] = sum_{i >= j} b_i^2
    real = True if valid is None else valid
    sum_log_w = 0.0 if w is None else np.log(np.where(real, w, 1.0)).sum(axis=1)[:, None]

    degrees = np.arange(spec.min_degree, spec.max_degree + 1)
    k = spec.p(degrees)
    rss = rss_full[:, None] + np.concatenate([tail[:, k[k < big_p]],
                                              np.zeros((G, int((k >= big_p).sum())))], axis=1)
    rss = np.where(rss <= EXACT_FIT_RTOL ** 2 * sum_zw2[:, None], 0.0, rss)
    head = np.cumsum(b2, axis=1)
    ss_model = head[:, k - 1] - (head[:, [0]] if spec.intercept else 0.0)
    exact = (rss == 0.0) & (n[:, None] - k[None, :] > 0)   # as summary.measures
    cand = eng.criteria(rss, ss_model, n[:, None], k[None, :].astype(float), spec.c, sum_log_w)
    f, pf = eng.f_last(b[:, k - 1], rss, cand["df_residual"], exact, with_p=False)
    if spec.intercept and degrees[0] == 0:
        f[:, 0] = np.nan
    if spec.select == "sequential_f":
        pf = _climb_p_values(f, cand["df_residual"], spec.alpha)
    cand.update(f_last=f, p_last=pf, exact=exact,
                press=_press(q, b, res, k, real, exact) if spec.need_press
                else np.full(rss.shape, np.nan))
    pick = choose(cand, spec)
    rows = np.arange(G)
    chosen = degrees[pick]
    p_row = spec.p(chosen)
    out = {f"cand_{key}": val for key, val in cand.items()}
    out.update({key: val[rows, pick] for key, val in cand.items()})
    out["sigma"] = np.where(out["exact"], 0.0, out["sigma"])  # as fit_series: exact -> 0
    out.update(_coefficients(coef, b, p_row, out["sigma"], shift, scale, spec))
    low, high = int(p_row.min()), int(p_row.max())
    keep = np.arange(low, big_p)[None, :] >= p_row[:, None]  # effects the model leaves out
    resid = res + np.einsum("gk,kgn->gn", b[:, low:] * keep, q[low:]) if keep.any() else res
    if s is None and spec.intercept:  # q_0 = 1/sqrt(n) everywhere: its square is 1/n
        lev = np.einsum("kgn,kgn->gn", q[1:low], q[1:low]) if low > 1 else np.zeros(t.shape)
        lev += (1.0 / n)[:, None]
    else:
        lev = np.einsum("kgn,kgn->gn", q[:low], q[:low])
    for j in range(low, high):
        lev += (p_row > j)[:, None] * (q[j] * q[j])
    out.update(degree=chosen, n=n, x_shift=shift, x_scale=scale, resid_w=resid, leverage=lev,
               q=q, t=t, sqrt_w=s, coef_t=coef, p=p_row)
    return out


def _press(q, b, res, k, valid, exact):
    """PRESS of every candidate: sum of (e_i / (1 - h_i))^2; NaN when some h_i ~ 1."""
    big_p = q.shape[0]
    out = np.empty((res.shape[0], k.size))
    e = res.copy()
    lev = np.einsum("kgn,kgn->gn", q, q)
    kk = big_p
    for i in range(k.size - 1, -1, -1):   # walk down from the largest model
        while kk > k[i]:
            kk -= 1
            e += b[:, kk, None] * q[kk]
            lev -= q[kk] * q[kk]
        with np.errstate(divide="ignore", invalid="ignore"):
            loo = np.where(valid, e / (1 - lev), 0.0)
            ok = np.where(valid, lev < LEVERAGE_ONE, True).all(axis=1)
            out[:, i] = np.where(ok, eng._dot(loo, loo), np.nan)
    return np.where(exact, 0.0, out)


def _climb_p_values(f, df, alpha):
    """p-values of the last power for the candidates the sequential F climb examines.

    Significance is decided against the critical value ``F(1, df; 1 - alpha)``
    (one per distinct df; exact p-values settle values within 1e-9 of it);
    p-values, the costly part, are then computed only where the climb looked:
    up to and including the first non-significant candidate. Others are NaN.
    """
    uniq, inverse = np.unique(df, return_inverse=True)
    crit = special.fdtri(1, np.maximum(uniq, 1), 1 - alpha)[inverse].reshape(df.shape)
    with np.errstate(invalid="ignore"):
        sig = f > crit
        near = np.abs(f - crit) <= 1e-9 * crit
    if near.any():
        sig[near] = special.fdtrc(1, df[near], f[near]) < alpha
    climb = np.cumprod(sig[:, 1:], axis=1).sum(axis=1)
    look = (np.arange(f.shape[1])[None, :] <= climb[:, None] + 1) & np.isfinite(f)
    p = np.full(f.shape, np.nan)
    p[look] = special.fdtrc(1, df[look], f[look])
    return p


def choose(cand: dict, spec: BlockSpec) -> np.ndarray:
    """Index of the chosen candidate per row, by the rules of :mod:`service.core.selection`.

    A candidate that fits exactly ends the search (for ``sequential_f`` only
    when the climb reaches it). ``sequential_f``: climb from the lowest degree
    while the next power is significant at ``alpha``. Information criteria and
    PRESS: smallest value; ``adj_r2``: largest (ties: the lower degree; all
    undefined: the lowest degree).
    """
    G, m = cand["rss"].shape
    if spec.select == "fixed":
        return np.zeros(G, dtype=int)
    exact = cand["exact"]
    has_exact = exact.any(axis=1)
    first_exact = np.argmax(exact, axis=1)
    if spec.select == "sequential_f":
        climb = np.cumprod(cand["p_last"][:, 1:] < spec.alpha, axis=1).sum(axis=1)
        take_exact = has_exact & (first_exact <= climb + 1)
        return np.where(take_exact, first_exact, climb)
    if spec.select == "adj_r2":
        vals = cand["adj_r_squared"]
        pick = np.argmax(np.where(np.isnan(vals), -np.inf, vals), axis=1)
    else:
        vals = cand[spec.select]
        pick = np.argmin(np.where(np.isnan(vals), np.inf, vals), axis=1)
    pick = np.where(np.isnan(vals).all(axis=1), 0, pick)
    return np.where(has_exact, first_exact, pick)


def _coefficients(coef, b, p_row, sigma, shift, scale, spec: BlockSpec) -> dict:
    """Raw-x coefficients and standard errors of the chosen model, NaN beyond its terms."""
    big_p = coef.shape[1]
    keep = np.arange(big_p)[None, :] < p_row[:, None]
    cm = coef * keep[:, None, :]                     # columns of R^-1 the model uses
    tm = eng.raw_power_matrix(shift, scale, big_p, 1 - spec.c)
    half = tm @ cm                                   # T R^-1: cov_raw = sigma^2 half half'
    a_raw = (half @ (b * keep)[:, :, None])[:, :, 0]
    se = np.sqrt(np.einsum("gjk,gjk->gj", half, half)) * sigma[:, None]
    return {"coef": np.where(keep, a_raw, np.nan), "se": np.where(keep, se, np.nan)}
