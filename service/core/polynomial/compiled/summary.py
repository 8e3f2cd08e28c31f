"""Compiled whole-fit measures of every candidate degree.

The formulas are documented in :mod:`service.core.polynomial.summary`.
"""

from __future__ import annotations

import math

import numba
import numpy as np

COLUMNS = ("rss", "tss", "ss_model", "r_squared", "adj_r_squared", "sigma", "f",
           "log_likelihood", "aic", "aicc", "bic", "press", "press_r_squared", "f_last")
LOG_2PI = math.log(2 * math.pi)


@numba.njit(cache=True, nogil=True, error_model="numpy")
def candidate_table(effects, rss_full, exact_cut, press, n, c, ps, half_logw):
    """One row per candidate (coefficients ``ps``, ascending) with the :data:`COLUMNS`.

    ``effects`` are the largest model's ``Q'zw`` (float64), ``rss_full`` its
    residual SS, ``exact_cut`` the residual SS at or below which a fit is
    exact (reported as 0), ``press`` each candidate's PRESS, ``c`` 1 with an
    intercept, ``half_logw`` half the sum of log weights.

    Also returns ``tails`` (3 x 2k): numerator df, denominator df and F of the
    overall F tests, then of the last powers' F(1, df) tests, as
    ``scipy.special.fdtrc`` takes them.
    """
    big = effects.size
    e2 = effects * effects
    left = np.zeros(big + 1)  # left[p] = sum of e2[p:], summed from the small end
    for j in range(big - 1, -1, -1):
        left[j] = left[j + 1] + e2[j]
    out = np.full((ps.size, len(COLUMNS)), np.nan)
    k = ps.size
    tails = np.empty((3, 2 * k))
    ss_model = 0.0
    for j in range(c, ps[0]):
        ss_model += e2[j]
    log_n = np.log(n)
    for i in range(ps.size):
        p = ps[i]
        if i > 0:
            ss_model += e2[p - 1]
        df_model, df_res = p - c, n - p
        rss = rss_full + left[p]
        if rss <= exact_cut:
            rss = 0.0
        tss = ss_model + rss
        exact = rss == 0.0 and df_res > 0
        row = out[i]
        row[0], row[1], row[2] = rss, tss, ss_model
        r2 = ss_model / tss if tss > 0 else np.nan
        row[3] = r2
        if df_res > 0:
            if tss > 0:
                row[4] = 1 - (1 - r2) * (n - c) / df_res
            mse = rss / df_res
            row[5] = mse ** 0.5
            if rss > 0:
                if df_model > 0:
                    row[6] = (ss_model / df_model) / mse
                if p > c:
                    row[13] = e2[p - 1] / mse
        if rss > 0:
            llf = -0.5 * n * (LOG_2PI + np.log(rss / n) + 1) + half_logw
            row[7] = llf
            row[8] = -2 * llf + 2 * p
            row[10] = -2 * llf + p * log_n
            if n - p - 1 > 0:
                row[9] = row[8] + 2 * p * (p + 1) / (n - p - 1)
        row[11] = 0.0 if exact else press[i]
        row[12] = 1 - row[11] / tss if tss > 0 else np.nan
        tails[0, i], tails[1, i], tails[2, i] = df_model, df_res, row[6]
        tails[0, k + i], tails[1, k + i], tails[2, k + i] = 1, df_res, row[13]
    return out, tails
