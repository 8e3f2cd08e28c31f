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
from math import log, pi, sqrt

import numpy as np
from scipy import special

from service.core.decomposition import Decomposition

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


def measures(dec: Decomposition, degree: int, sum_log_w: float,
             leverage: np.ndarray, fitted: np.ndarray) -> Measures:
    """Compute the whole-fit numbers of the candidate of ``degree``.

    ``leverage`` and ``fitted`` are that candidate's hat diagonal and
    weighted fitted values (both length n).
    """
    n, p = dec.t.size, dec.p(degree)
    c = 1 if dec.intercept else 0
    df_model, df_res = p - c, n - p
    rss = dec.rss(degree)
    eff = dec.effects[c:p]
    ss_model = float(eff @ eff)
    tss = ss_model + rss
    exact = rss == 0.0 and ss_model > 0
    with np.errstate(all="ignore"):
        r2 = ss_model / tss if tss > 0 else NAN
        adj = 1 - (1 - r2) * (n - c) / df_res if df_res > 0 else NAN
        mse = rss / df_res if df_res > 0 else NAN
        sigma = sqrt(mse) if df_res > 0 else NAN
        if df_model > 0 and df_res > 0 and not exact:
            f = (ss_model / df_model) / mse
            fp = float(special.fdtrc(df_model, df_res, f))
        else:
            f = fp = NAN
        if df_res > 0 and p > c and not exact:
            last = float(dec.effects[p - 1]) ** 2
            f_last = last / mse
            p_last = float(special.fdtrc(1, df_res, f_last))
        else:
            f_last = p_last = NAN
        if rss > 0:
            llf = -0.5 * n * (log(2 * pi) + log(rss / n) + 1) + 0.5 * sum_log_w
            aic = -2 * llf + 2 * p
            bic = -2 * llf + p * log(n)
            aicc = aic + 2 * p * (p + 1) / (n - p - 1) if n - p - 1 > 0 else NAN
        else:
            llf = aic = bic = aicc = NAN
        if np.all(leverage < LEVERAGE_ONE):
            loo = (dec.zw - fitted) / (1 - leverage)
            press = 0.0 if exact else float(loo @ loo)
            pred_r2 = 1 - press / tss if tss > 0 else NAN
        else:
            press = pred_r2 = NAN
    return Measures(degree, n, p, df_model, df_res, rss, tss, ss_model, r2, adj, sigma, f, fp,
                    llf, aic, aicc, bic, press, pred_r2, f_last, p_last, exact)
