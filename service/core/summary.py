"""Whole-fit measures of one candidate degree: sums of squares, R², criteria, PRESS.

Conventions (documented for callers):

* Weights are inverse variances; every sum of squares is weighted.
* With an intercept, the total SS is about the weighted mean (centred) and
  ``df_model = p - 1``; without one it is uncentred, ``df_model = p`` and
  R² = SS_reg / (SS_reg + SS_res) as NIST StRD defines it.
* Log-likelihood is the Gaussian one at the ML variance RSS/n, including
  ``0.5 * sum(log w)`` for weighted fits. AIC = -2 llf + 2k, BIC = -2 llf
  + k log n and AICc = AIC + 2k(k+1)/(n-k-1) with k = number of
  coefficients (the error variance is not counted; the same constant for
  every candidate, so choices are unaffected except through AICc).
* PRESS = sum of squared leave-one-out residuals e_i / (1 - h_i);
  predicted R² = 1 - PRESS / total SS.
"""

from __future__ import annotations

from dataclasses import dataclass
from math import log, pi

import numpy as np
from scipy import special

from service.core.decomposition import EXACT_FIT_RTOL, Decomposition

NAN = float("nan")
LEVERAGE_ONE = 1 - 1e-10  # h_i above this: the leave-one-out residual is undefined


@dataclass(frozen=True, slots=True)
class Measures:
    """Internal: every whole-fit number of one candidate."""

    degree: int
    n: int
    p: int
    df_model: int
    df_residual: int
    rss: float
    tss: float
    ss_model: float
    r_squared: float
    adj_r_squared: float
    sigma: float
    f: float
    f_p_value: float
    log_likelihood: float
    aic: float
    aicc: float
    bic: float
    press: float
    predicted_r_squared: float
    f_last: float
    p_last: float
    exact: bool


def candidate_measures(dec: Decomposition, degrees: list[int], sum_log_w: float,
                       leverage: np.ndarray, fitted: np.ndarray) -> list[Measures]:
    """Whole-fit numbers of every candidate degree, vectorized over the candidates.

    ``leverage`` and ``fitted`` are the candidates' hat diagonals and weighted
    fitted values (``len(degrees) x n``, see ``Decomposition.cumulative``).
    Sums of squares of effects are sums of positive terms, so float64 keeps
    them to full precision.
    """
    n = dec.t.size
    c = 1 if dec.intercept else 0
    e2 = dec.effects.astype(float) ** 2
    deg = np.asarray(degrees)
    p = deg + c
    # running sums without cancellation: model SS from the first power on, residual SS from
    # the tail of effects each candidate leaves out
    ss_model = np.concatenate(([0.0], np.cumsum(e2[c:])))[p - c]
    tails = np.concatenate((np.cumsum(e2[::-1])[::-1], [0.0]))
    rss = dec.rss_full + tails[p]
    rss[rss <= (EXACT_FIT_RTOL ** 2) * dec.sum_zw2] = 0.0
    tss = ss_model + rss
    df_model, df_res = p - c, n - p
    exact = (rss == 0.0) & (df_res > 0)
    with np.errstate(all="ignore"):
        loo = (dec.zw - fitted) / (1 - leverage)
        press = np.einsum("ij,ij->i", loo, loo)
        press[np.any(leverage >= LEVERAGE_ONE, axis=1)] = NAN
        press[exact] = 0.0
        good_t = tss > 0
        r2 = np.where(good_t, ss_model / tss, NAN)
        adj = np.where((df_res > 0) & good_t, 1 - (1 - r2) * (n - c) / df_res, NAN)
        mse = np.where(df_res > 0, rss / df_res, NAN)
        sigma = np.sqrt(mse)
        fit_ok = (df_res > 0) & ~exact & (rss > 0)
        f = np.where(fit_ok & (df_model > 0), (ss_model / df_model) / mse, NAN)
        f_last = np.where(fit_ok & (p > c), e2[p - 1] / mse, NAN)
        f_p = special.fdtrc(df_model, df_res, f)
        last_p = special.fdtrc(1, df_res, f_last)
        pos = rss > 0
        llf = np.where(pos, -0.5 * n * (log(2 * pi) + np.log(rss / n) + 1) + 0.5 * sum_log_w,
                       NAN)
        aic = -2 * llf + 2 * p
        bic = -2 * llf + p * log(n)
        aicc = np.where(n - p - 1 > 0, aic + 2 * p * (p + 1) / (n - p - 1), NAN)
        pred_r2 = np.where(good_t, 1 - press / tss, NAN)
    cols = (deg, np.full(deg.size, n), p, df_model, df_res, rss, tss, ss_model, r2, adj, sigma,
            f, f_p, llf, aic, aicc, bic, press, pred_r2, f_last, last_p, exact)
    return [Measures(*row) for row in zip(*(col.tolist() for col in cols), strict=True)]
