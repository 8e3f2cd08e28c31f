"""Diagnostics and trust flags of the chosen fits of a block, vectorized across rows.

Same definitions, thresholds and flag rules as :mod:`service.core.diagnostics`
and :mod:`service.core.flags` (common-practice cut-offs: Bonferroni outlier
limit, ``h > 2p/n``, Cook's distance above the median of ``F(p, n - p)``,
tests at alpha 0.05, Durbin-Watson outside [1.5, 2.5]); the flags of a row
are a bit mask over :data:`FLAG_CODES`, in the order ``fit_series`` lists
them (``extrapolation`` only arises with a grid, on the single-series path).
"""

from __future__ import annotations

import numpy as np
from scipy import special

from service.core import batch_tests as tests
from service.core import flags as single
from service.core.anova import lack_of_fit
from service.core.diagnostics import OUTLIER_ALPHA

FLAG_CODES = ("exact_fit", "no_residual_df", "few_points_per_parameter",
              "ill_conditioned_design", "lack_of_fit", "non_normal_residuals",
              "non_constant_variance", "serial_correlation", "outliers",
              "influential_points", "high_leverage", "extrapolation")
BIT = {code: 1 << i for i, code in enumerate(FLAG_CODES)}


def _per_unique(func, *keys):
    """Evaluate a costly scalar function once per distinct combination of keys."""
    a, b = (np.asarray(k, dtype=np.int64) for k in keys)   # small whole numbers
    code = a * (int(b.max(initial=0)) + 1) + b
    uniq, inverse = np.unique(code, return_inverse=True)
    first = np.zeros(uniq.size, dtype=np.int64)
    first[inverse[::-1]] = np.arange(code.size)[::-1]
    with np.errstate(all="ignore"):
        values = func(a[first].astype(float), b[first].astype(float))
    return np.asarray(values, dtype=float)[inverse.ravel()]


def condition_numbers(coef_t: np.ndarray, p: np.ndarray, sum_w: np.ndarray) -> np.ndarray:
    """2-norm condition number of each row's leading ``p x p`` R factor, where it matters.

    ``coef_t`` holds ``R^-1`` (upper triangular) of the weighted design on
    powers of ``t`` in [-1, 1], so ``||R||_F^2 = sum_k sum_i w_i t_i^(2k) <= p sum(w)``
    and ``cond_2 <= ||R||_F ||R^-1||_F <= sqrt(p sum w) ||R^-1||_F``. Rows whose
    bound exceeds :data:`service.core.flags.COND_CAUTION` get the exact value
    from an SVD; the others return the bound, then known to be below the threshold.
    """
    G, P, _ = coef_t.shape
    keep = np.arange(P)[None, :] < p[:, None]
    cm = coef_t * (keep[:, :, None] & keep[:, None, :])
    bound = np.sqrt(p * sum_w * np.einsum("gij,gij->g", cm, cm))
    out = bound.copy()
    for g in np.flatnonzero(~(bound <= single.COND_CAUTION)):
        k = int(p[g])
        with np.errstate(all="ignore"):
            s = np.linalg.svd(np.linalg.inv(coef_t[g, :k, :k]), compute_uv=False)
        out[g] = s[0] / s[-1] if s[-1] > 0 else np.inf
    return out


def diagnose_block(fit: dict, valid: np.ndarray | None, u: np.ndarray, z: np.ndarray,
                   w: np.ndarray | None, repeats: np.ndarray, bp_basis: np.ndarray) -> dict:
    """Residual tests, influence counts, lack of fit and the flag mask of each row.

    Parameters
    ----------
    fit : dict
        Output of :func:`service.core.batch_block.fit_block`.
    valid : (G, L) bool or None (no padding).
    u, z, w : the block's x, y (fitting scale) and weights (None: unweighted).
    repeats : (G,) bool, rows whose x has repeated values (lack-of-fit test).
    bp_basis : (P, G, L) unweighted orthonormal basis of powers of t.
    """
    e, h, n = fit["resid_w"], fit["leverage"], fit["n"]
    p = fit["p"].astype(float)
    degree = fit["degree"]
    exact = fit["exact"]
    rss = fit["rss"]
    df = n - p
    padded = valid is not None
    usable = ~exact & (df >= 1)
    bonf = _per_unique(lambda d, k: special.stdtrit(d - 1, 1 - OUTLIER_ALPHA / (2 * k)), df, n)
    cook_cut = _per_unique(lambda k, d: special.fdtri(k, d, 0.5), p, np.maximum(df, 1))
    # With r_i = e_i^2 / (1 - h_i): the externally studentized residual squared is
    # r_i (df - 1) / (rss - r_i), so |t_i| > c  <=>  r_i > c^2 rss / (df - 1 + c^2); and
    # Cook's D_i = r_i h_i / ((1 - h_i) p sigma^2). Same tests, fewer passes over the data.
    with np.errstate(all="ignore"):
        b2 = bonf * bonf
        out_cut = np.where(usable & (df > 1), b2 * rss / (df - 1 + b2), np.inf)
        inf_cut = np.where(usable, cook_cut * p * rss / df, np.inf)
        one_h = 1 - h
        e2 = e * e
        r = e2 / one_h
        outlier = r > out_cut[:, None]
        r *= h
        r /= one_h
        influential = r > inf_cut[:, None]
        high = h > np.where(n > p, 2 * p / n, np.inf)[:, None]
    if padded:  # padded points have e = h = 0 and never pass; keep the masks exact anyway
        outlier &= valid
        influential &= valid
        high &= valid

    sw_w, sw_p = tests.shapiro_wilk(e, n, padded)
    dw = tests.durbin_watson(e, n, padded)
    bp_lm, bp_p = tests.breusch_pagan(e2, n, bp_basis, degree, padded)
    sw_w, sw_p, dw, bp_lm, bp_p = (np.where(usable, a, np.nan)
                                   for a in (sw_w, sw_p, dw, bp_lm, bp_p))
    lof_f = np.full(n.shape, np.nan)
    lof_p = np.full(n.shape, np.nan)
    for g in np.flatnonzero(repeats):
        k = int(n[g])
        sw_row = None if w is None else np.sqrt(w[g, :k])
        zw_row = z[g, :k] if sw_row is None else z[g, :k] * sw_row
        lof = lack_of_fit(u[g, :k], zw_row, sw_row, float(rss[g]), int(p[g]))
        if lof is not None:
            lof_f[g], lof_p[g] = lof.f, lof.p_value
    sum_w = n if w is None else (w if valid is None else w * valid).sum(axis=1)
    cond = condition_numbers(fit["coef_t"], fit["p"], sum_w)

    mask = np.zeros(n.shape, dtype=np.int64)
    mask |= np.where(exact, BIT["exact_fit"], 0)
    mask |= np.where(n == p, BIT["no_residual_df"], 0)
    mask |= np.where((n != p) & (n < single.POINTS_PER_PARAMETER * p),
                     BIT["few_points_per_parameter"], 0)
    mask |= np.where(cond > single.COND_CAUTION, BIT["ill_conditioned_design"], 0)
    mask |= np.where(lof_p < single.TEST_ALPHA, BIT["lack_of_fit"], 0)
    mask |= np.where(sw_p < single.TEST_ALPHA, BIT["non_normal_residuals"], 0)
    mask |= np.where(bp_p < single.TEST_ALPHA, BIT["non_constant_variance"], 0)
    mask |= np.where(~np.isnan(dw) & ~((dw >= single.DW_LOW) & (dw <= single.DW_HIGH)),
                     BIT["serial_correlation"], 0)
    n_out, n_inf, n_high = (np.count_nonzero(m, axis=1) for m in (outlier, influential, high))
    mask |= np.where(n_out > 0, BIT["outliers"], 0)
    mask |= np.where(n_inf > 0, BIT["influential_points"], 0)
    mask |= np.where(n_high > 0, BIT["high_leverage"], 0)
    return {"flags": mask, "shapiro_wilk": sw_w, "shapiro_wilk_p": sw_p, "durbin_watson": dw,
            "breusch_pagan": bp_lm, "breusch_pagan_p": bp_p, "lack_of_fit_f": lof_f,
            "lack_of_fit_p": lof_p, "condition_number": cond, "n_outliers": n_out,
            "n_influential": n_inf, "n_high_leverage": n_high,
            "outlier_points": np.nonzero(outlier), "influential_points": np.nonzero(influential)}
