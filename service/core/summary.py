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

from functools import lru_cache
from math import log, pi
from typing import NamedTuple

from scipy import special

from service.core.decomposition import (  # noqa: F401  (LEVERAGE_ONE: re-exported)
    EXACT_FIT_RTOL,
    LEVERAGE_ONE,
    Decomposition,
)

NAN = float("nan")
LOG_2PI = log(2 * pi)


@lru_cache(maxsize=4096)
def t_quantile(df: int, q: float) -> float:
    """Student t quantile ``t_df(q)`` (``scipy.special.stdtrit``), cached: fits of equal
    size and level reuse their critical values."""
    return float(special.stdtrit(df, q))


@lru_cache(maxsize=4096)
def f_quantile(dfn: int, dfd: int, q: float) -> float:
    """F quantile ``F_{dfn, dfd}(q)`` (``scipy.special.fdtri``), cached like :func:`t_quantile`."""
    return float(special.fdtri(dfn, dfd, q))


class Measures(NamedTuple):
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


def candidate_measures(dec: Decomposition, degrees: list[int], sum_log_w: float
                       ) -> list[Measures]:
    """Whole-fit numbers of every candidate degree (``degrees`` ascending, as decomposed).

    PRESS comes from the decomposition's candidate pass (``dec.press``).
    Sums of squares of effects are sums of positive terms, so float64 keeps
    them to full precision; the per-candidate arithmetic runs on Python
    floats (at most 13 candidates, cheaper than numpy calls).
    """
    n = dec.t.size
    c = 1 if dec.intercept else 0
    press_all = dec.press
    e2 = (dec.effects64 ** 2).tolist()
    big = len(e2)
    tails = [0.0] * (big + 1)  # tails[p] = sum of e2[p:], summed from the small end
    for j in range(big - 1, -1, -1):
        tails[j] = tails[j + 1] + e2[j]
    exact_cut = (EXACT_FIT_RTOL ** 2) * dec.sum_zw2
    log_n, half_logw = log(n), 0.5 * sum_log_w
    rows = []
    ss_model = 0.0
    first = True
    for i, degree in enumerate(degrees):
        p = degree + c
        if first:
            ss_model = sum(e2[c:p])
            first = False
        else:
            ss_model += e2[p - 1]
        df_model, df_res = p - c, n - p
        rss = dec.rss_full + tails[p]
        if rss <= exact_cut:
            rss = 0.0
        tss = ss_model + rss
        exact = rss == 0.0 and df_res > 0
        r2 = ss_model / tss if tss > 0 else NAN
        adj = 1 - (1 - r2) * (n - c) / df_res if df_res > 0 and tss > 0 else NAN
        mse = rss / df_res if df_res > 0 else NAN
        sigma = mse ** 0.5 if df_res > 0 else NAN
        fit_ok = df_res > 0 and rss > 0
        f = (ss_model / df_model) / mse if fit_ok and df_model > 0 else NAN
        f_last = e2[p - 1] / mse if fit_ok and p > c else NAN
        if rss > 0:
            llf = -0.5 * n * (LOG_2PI + log(rss / n) + 1) + half_logw
            aic, bic = -2 * llf + 2 * p, -2 * llf + p * log_n
            aicc = aic + 2 * p * (p + 1) / (n - p - 1) if n - p - 1 > 0 else NAN
        else:
            llf = aic = bic = aicc = NAN
        press = 0.0 if exact else press_all[i]
        pred_r2 = 1 - press / tss if tss > 0 else NAN
        rows.append([degree, n, p, df_model, df_res, rss, tss, ss_model, r2, adj, sigma, f,
                     NAN, llf, aic, aicc, bic, press, pred_r2, f_last, NAN, exact])
    k = len(rows)
    df_r = [r[4] for r in rows]
    # one call for both: overall F on (df_model, df_res), last power's F on (1, df_res)
    both = special.fdtrc([r[3] for r in rows] + [1] * k, df_r + df_r,
                         [r[11] for r in rows] + [r[19] for r in rows]).tolist()
    f_p, last_p = both[:k], both[k:]
    for row, fp, lp in zip(rows, f_p, last_p, strict=True):
        row[12], row[20] = fp, lp
    return [Measures(*row) for row in rows]
