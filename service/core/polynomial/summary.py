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
* With known measurement SDs (``weighting = "known_sd"``, weights ``1/SD²``) the
  log-likelihood is the Gaussian one at the known variances,
  ``-0.5 (n log 2 pi - sum(log w) + RSS)`` (:func:`with_known_variance`); the
  criteria follow from it with the same k.
* PRESS = sum of squared leave-one-out residuals e_i / (1 - h_i);
  predicted R² = 1 - PRESS / total SS.
"""

from __future__ import annotations

import math
from typing import NamedTuple

import numpy as np
from scipy import special

from service.core.polynomial.compiled.summary import candidate_table
from service.core.polynomial.decomposition import (  # noqa: F401  (LEVERAGE_ONE: re-exported)
    EXACT_FIT_RTOL,
    LEVERAGE_ONE,
    Decomposition,
)

LOG_2PI = math.log(2.0 * math.pi)


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
    press_r_squared: float
    f_last: float
    p_last: float
    exact: bool


def candidate_measures(dec: Decomposition, degrees: list[int], sum_log_w: float
                       ) -> list[Measures]:
    """Whole-fit numbers of every candidate degree (``degrees`` ascending, as decomposed).

    PRESS comes from the decomposition's candidate pass (``dec.press``); the
    arithmetic of the conventions above runs in one compiled loop
    (``kernels_summary.candidate_table``), the F tail probabilities in one
    scipy call. Sums of squares of effects are sums of positive terms, so
    float64 keeps them to full precision.
    """
    n = dec.t.size
    c = 1 if dec.intercept else 0
    ps = [d + c for d in degrees]
    table, tails = candidate_table(dec.effects64, dec.rss_full,
                                   (EXACT_FIT_RTOL ** 2) * dec.sum_zw2, dec.press, n,
                                   c, np.asarray(ps, dtype=np.int64), 0.5 * sum_log_w)
    k = len(ps)
    df_res = [n - p for p in ps]
    # one call for both: overall F on (df_model, df_res), last power's F on (1, df_res)
    probs = special.fdtrc(tails[0], tails[1], tails[2]).tolist()
    rows = table.tolist()
    return [Measures(d, n, p, p - c, df, r[0], r[1], r[2], r[3], r[4], r[5], r[6], fp, r[7],
                     r[8], r[9], r[10], r[11], r[12], r[13], lp, r[0] == 0.0 and df > 0)
            for d, p, df, r, fp, lp in zip(degrees, ps, df_res, rows, probs[:k], probs[k:],
                                           strict=True)]


def with_known_variance(cands: list[Measures], sum_log_w: float) -> list[Measures]:
    """The candidates' log-likelihood, AIC, AICc and BIC at known variances ``1/w``.

    Parameters
    ----------
    cands : list of Measures
        From :func:`candidate_measures`.
    sum_log_w : float
        ``sum(log w)`` of the weights ``1/SD²``.
    """
    out = []
    for m in cands:
        llf = -0.5 * (m.n * LOG_2PI - sum_log_w + m.rss)
        aic = -2.0 * llf + 2.0 * m.p
        gap = m.n - m.p - 1
        aicc = aic + 2.0 * m.p * (m.p + 1) / gap if gap > 0 else math.nan
        out.append(m._replace(log_likelihood=llf, aic=aic, aicc=aicc,
                              bic=-2.0 * llf + m.p * math.log(m.n)))
    return out

