"""Compiled per-series kernel of the batch engine: every fit of a series in one pass.

:func:`fit_rows` walks the series of a chunk one after another and, for
each, scales x, builds the orthonormal basis, reads every candidate degree
off it, selects one, converts the coefficients to raw x, and computes the
residual tests and influence counts of the chosen fit. The work per series
is a few passes over its own points, in cache, with no temporary arrays;
the distribution functions (p-values, quantiles) stay in scipy, evaluated
before (tables per length) or after (vectorized over the chunk) the kernel.

The numerics of the basis are described in :mod:`service.core.batch.basis`;
the residual checks in :mod:`service.core.batch.residuals`.
"""

from __future__ import annotations

import math

import numba
import numpy as np

from service.core.batch.basis import basis, distinct, dot
from service.core.batch.ftail import f1_tail
from service.core.batch.kernel_steps import press, screen, select
from service.core.batch.residuals import residual_pass

SELECT_CODES = {"sequential_f": 0, "aic": 1, "aicc": 2, "bic": 3, "press": 4, "adj_r2": 5,
                "fixed": 6}
# candidate measures, first axis of the ``cand`` output
CAND = ("df_residual", "rss", "sigma", "r_squared", "adj_r_squared", "aic", "aicc", "bic",
        "press", "f_last", "p_last")
# per-series scalars, columns of the ``sc`` output
SC = ("n", "degree", "df_residual", "rss", "sigma", "r_squared", "adj_r_squared", "aic",
      "aicc", "bic", "press", "shapiro_wilk", "durbin_watson", "breusch_pagan",
      "condition_number", "n_outliers", "n_influential", "n_high_leverage",
      "n_influential_outliers", "n_leveraged_outliers", "repeats", "exact", "p",
      "dw_trace_g", "dw_frob_g", "dw_frob_aq")
_N_OUTLIERS = SC.index("n_outliers")   # .. the five counts of residual_pass in order
_DW_SUMS = SC.index("dw_trace_g")      # .. its three Durbin-Watson design sums in order
_CONDITION_NUMBER = SC.index("condition_number")
_REPEATS = SC.index("repeats")
_EXACT = SC.index("exact")
_P = SC.index("p")
_SHAPIRO_WILK = SC.index("shapiro_wilk")
_DURBIN_WATSON = SC.index("durbin_watson")
_BREUSCH_PAGAN = SC.index("breusch_pagan")
OK, REJECT = 0, 1          # status: fitted here / hand the series to fit_series
NEAR_CRIT = 1e-9           # an F this close to its critical value is settled by fit_series
_TWO_PI_LOG = math.log(2.0 * math.pi)


@numba.njit(cache=True, nogil=True, error_model="numpy")
def fit_rows(u, z, w, unit, offsets, rows, dmin, dmax, intercept, code, need_press, known,
             crit, log_beta, slot, bonf, cook, magnitude, binom, rtol2, lev_one, cond_caution, tiny,
             sc, cand, coef, se, marks, resid, status):
    """Fit, select and diagnose each series ``rows[g]``; results go to row ``g`` of the outputs.

    Parameters
    ----------
    u, z, w : ndarray
        Flat x and y on the fitting scale and weights (ignored when ``unit``);
        series ``r`` is ``offsets[r]:offsets[r + 1]``.
    dmin, dmax, intercept, code, need_press
        Candidate degrees, intercept, :data:`SELECT_CODES` value, whether PRESS is wanted.
    known : bool
        Weights are ``1/SD²`` of known errors: unscaled standard errors, and AIC, AICc, BIC
        (and choices on them) at the known variances (``summary.with_known_variance``).
    crit, log_beta : ndarray
        ``F(1, df; 1 - alpha)`` and ``ln B(df/2, 1/2)`` by residual df.
    slot, bonf, cook, magnitude
        Per length ``n``: ``slot[n]`` indexes ``bonf[., p]`` (Bonferroni t limit),
        ``cook[., p]`` (median of ``F(p, n - p)``) and ``magnitude`` (the largest
        |value| whose squares sum safely, :func:`service.core.data.inputs.magnitude_limit`).
    binom : ndarray (P, P)
        ``binom[i, j] = C(j + start, i + start)`` (raw-x conversion).
    rtol2, lev_one, cond_caution, tiny
        Exact-fit cut-off (squared, relative to ``sum zw^2``), the leverage above
        which a leave-one-out residual is undefined, the condition number handed to
        fit_series, and the smallest magnitude whose squares stay normal.
    sc, cand, coef, se : ndarray
        Outputs (see :data:`SC`, :data:`CAND`); ``marks`` flat per point
        (outlier and influential bits); ``resid`` flat per point, the chosen
        fit's weighted residuals; ``status`` :data:`OK` or :data:`REJECT`.
        The ``shapiro_wilk`` column receives the residuals' sum of squared
        deviations (NaN where the test does not apply): W needs sorted
        residuals, which numpy's vectorized sort gives faster
        (:func:`service.core.batch.residuals.shapiro_w_p`).
    """
    c = 1 if intercept else 0
    P = dmax + c
    m = dmax - dmin + 1
    start = 1 - c
    width = 1
    for g in range(rows.size):
        width = max(width, offsets[rows[g] + 1] - offsets[rows[g]])
    t = np.empty(width)
    s = np.ones(width)
    zw = np.empty(width)
    res = np.empty(width)
    e = np.empty(width)
    bp_sums = np.empty(dmax + 2)
    q = np.empty((P, width))
    qb = np.empty((dmax + 1, width))
    ck = np.zeros((P, P))
    ckb = np.zeros((dmax + 1, dmax + 1))
    b = np.empty(P)
    tail = np.empty(P + 1)
    head = np.empty(P + 1)
    half = np.empty((P, P))
    negp = np.empty(P + 1)
    invs = np.empty(P + 1)
    exact = np.zeros(m, dtype=np.bool_)
    f = np.empty(m)
    cc = np.empty((len(CAND), m))
    for g in range(rows.size):
        a = offsets[rows[g]]
        n = offsets[rows[g] + 1] - a
        uu, zz = u[a:a + n], z[a:a + n]
        status[g] = REJECT
        fine, small, big = screen(uu, zz, w, a, n, unit, magnitude[slot[n]], tiny)
        if not fine:
            continue        # fit_series' answer: its missing-value policy or its DataError
        n_distinct = distinct(uu, n)
        if n_distinct - c < dmax:
            continue        # fit_series lowers max_degree (or refuses): its answer
        if intercept:
            shift, scale = 0.5 * small + 0.5 * big, 0.5 * big - 0.5 * small
        else:
            shift, scale = 0.0, max(abs(big), abs(small))
        if not scale > 0:
            scale = 1.0
        sum_w = float(n)
        sum_log_w = 0.0
        for i in range(n):
            t[i] = (uu[i] - shift) / scale
            if not unit:
                s[i] = math.sqrt(w[a + i])
                sum_log_w += math.log(w[a + i])
        if not unit:
            sum_w = w[a:a + n].sum()
        basis(t, s, n, P, intercept, unit, q, ck)
        for i in range(n):
            zw[i] = zz[i] * s[i] if not unit else zz[i]
        sum_zw2 = dot(zw, zw, n)
        k0 = 0
        if intercept:  # remove the weighted mean first: no cancellation on large offsets
            if unit:
                zbar = zw[:n].sum() / n
            else:
                zbar = dot(s, zw, n) / sum_w
            for i in range(n):
                res[i] = zw[i] - (zbar if unit else zbar * s[i])
            b[0] = zbar * math.sqrt(sum_w)
            k0 = 1
        else:
            res[:n] = zw[:n]
        for k in range(k0, P):   # effects, then the residual after all P columns
            acc = 0.0
            for i in range(n):
                acc += q[k, i] * res[i]
            b[k] = acc
        for i in range(n):
            acc = 0.0
            for k in range(k0, P):
                acc += b[k] * q[k, i]
            res[i] -= acc
        rss_full = dot(res, res, n)
        tail[P] = 0.0
        for k in range(P - 1, -1, -1):
            tail[k] = tail[k + 1] + b[k] * b[k]
        head[0] = 0.0   # head[k]: model SS of the first k columns, the constant's effect left out
        for k in range(P):
            head[k + 1] = head[k] + (b[k] * b[k] if k >= k0 else 0.0)
        for j in range(m):
            kk = dmin + j + c
            rss = rss_full + tail[kk]
            if rss <= rtol2 * sum_zw2:
                rss = 0.0
            df = n - kk
            exact[j] = rss == 0.0 and df > 0
            ss_model = head[kk]   # a sum of squares, never a difference (large offsets)
            tss = ss_model + rss
            r2 = ss_model / tss if tss > 0 else np.nan
            cc[0, j] = df
            cc[1, j] = rss
            cc[2, j] = math.sqrt(rss / df) if df > 0 else np.nan
            cc[3, j] = r2
            cc[4, j] = 1 - (1 - r2) * (n - c) / df if df > 0 and tss > 0 else np.nan
            if known:   # -2 log-likelihood at the known variances 1/w
                m2llf = n * _TWO_PI_LOG - sum_log_w + rss
            elif rss > 0:
                m2llf = n * (_TWO_PI_LOG + math.log(rss / n) + 1) - sum_log_w
            else:
                m2llf = np.nan
            cc[5, j] = m2llf + 2 * kk
            cc[7, j] = m2llf + kk * math.log(n)
            cc[6, j] = cc[5, j] + 2.0 * kk * (kk + 1) / (n - kk - 1) if n - kk - 1 > 0 else np.nan
            cc[8, j] = np.nan
            ok = df > 0 and rss > 0 and not exact[j]
            f[j] = b[kk - 1] ** 2 / (rss / df) if ok else np.nan
        if intercept and dmin == 0:
            f[0] = np.nan
        cc[9, :m] = f[:m]
        if need_press:
            press(q, b, res, e, n, P, dmin + c, m, lev_one, exact, cc)
        pick, climb, near = select(code, cc, exact, f, crit, cc[0], m, NEAR_CRIT)
        for j in range(m):   # p-values where the sequential F climb looked (others NaN)
            looked = code == 0 and j <= climb + 1 and math.isfinite(f[j])
            cc[10, j] = f1_tail(f[j], cc[0, j], log_beta[int(cc[0, j])]) if looked else np.nan
        if near:
            continue        # significance within 1e-9 of the limit: fit_series decides
        p = dmin + pick + c
        df = n - p
        sigma = 0.0 if exact[pick] else cc[2, pick]
        scale_se = 1.0 if known else sigma   # known SDs: the covariance is not rescaled
        # raw-x coefficients: a_raw = T R^-1 b, cov = scale^2 (T R^-1)(T R^-1)'
        negp[0], invs[0] = 1.0, 1.0
        for k in range(1, P + 1):
            negp[k] = negp[k - 1] * -shift
            invs[k] = invs[k - 1] / scale
        for i in range(P):
            for k in range(P):
                acc = 0.0
                if k < p:
                    for mm in range(i, P):
                        acc += binom[i, mm] * negp[mm - i] * invs[mm + start] * ck[k, mm]
                half[i, k] = acc
        moderate = True
        for i in range(P):
            if i < p:
                est, var = 0.0, 0.0
                for k in range(p):
                    est += half[i, k] * b[k]
                    var += half[i, k] * half[i, k]
                sd = math.sqrt(var) * scale_se
                coef[g, i], se[g, i] = est, sd
                for v in (est, sd):
                    av = abs(v)
                    if av > 1e150 or (0 < av < 1e-150):
                        moderate = False
                if sd == 0 and scale_se > 0:
                    moderate = False
            else:
                coef[g, i], se[g, i] = np.nan, np.nan
        if not (math.isfinite(coef[g, 0]) and math.isfinite(cc[1, pick]) and moderate):
            continue
        # condition number of the leading p x p R: bound first, exact SVD when it matters
        fro = 0.0
        for i in range(p):
            for k in range(p):
                fro += ck[k, i] * ck[k, i]
        cond = math.sqrt(p * sum_w * fro)
        if not cond <= cond_caution:
            rinv = np.empty((p, p))
            for i in range(p):
                for k in range(p):
                    rinv[i, k] = ck[k, i]
            sv = np.linalg.svd(np.linalg.inv(rinv))[1]
            cond = sv[0] / sv[-1] if sv[-1] > 0 else np.inf
            if not cond <= cond_caution:
                continue    # fit_series' extended precision keeps the digits float64 loses
        status[g] = OK
        rss = cc[1, pick]
        usable = not exact[pick] and df >= 1
        out_cut, inf_cut, lev_cut = np.inf, np.inf, np.inf
        if usable and df > 1:
            b2 = bonf[slot[n], p] ** 2
            out_cut = b2 * rss / (df - 1 + b2)
        if usable:
            inf_cut = cook[slot[n], p] * p * rss / df
        if n > p:
            lev_cut = 2.0 * p / n
        degree = dmin + pick
        bp_degree = degree if usable and degree >= 1 and n > degree + 1 else 0
        if bp_degree and not (unit and intercept):
            basis(t, s, n, dmax + 1, True, True, qb, ckb)
        counts, spread, dw, bp, dw_sums = residual_pass(
            res, b, q, p, P, n, (out_cut, inf_cut, lev_cut),
            q if unit and intercept else qb, bp_degree, bp_sums, marks, resid, a)
        row = sc[g]
        row[0], row[1], row[2], row[3], row[4] = n, dmin + pick, df, rss, sigma
        for j in range(3, 9):   # r_squared .. press of the chosen candidate
            row[j + 2] = cc[j, pick]
        for j in range(5):
            row[_N_OUTLIERS + j] = counts[j]
        for j in range(3):
            row[_DW_SUMS + j] = dw_sums[j]
        row[_CONDITION_NUMBER] = cond
        row[_REPEATS] = 1.0 if n_distinct < n else 0.0
        row[_EXACT] = 1.0 if exact[pick] else 0.0
        row[_P] = p
        for kk in range(len(CAND)):
            for j in range(m):
                cand[kk, g, j] = cc[kk, j]
        if not usable:
            spread = dw = np.nan
        row[_SHAPIRO_WILK] = spread
        row[_DURBIN_WATSON] = dw
        row[_BREUSCH_PAGAN] = bp
