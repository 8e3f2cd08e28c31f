"""Compiled per-series kernel of the nonlinear batch: starts, solve, inference and checks.

:func:`fit_rows` fits every series of a chunk with one compiled family
(:mod:`.curves_models`) and writes, per series, the estimates, their
standard errors and the columns of :data:`STATS`, or marks the series for the
single-fit engine (``status`` 1). A series is handed over when the kernel
cannot promise the single fit's answer: no start converged, a singular
tangent plane, an exact fit, or constant x. A multi-start series whose fit here
stands unless a start that failed here would change it gets a provisional status
(:func:`.curves_multistart.provisional`: the caller re-solves those starts).

Per series: the shape start (:func:`.curves_starts.shape_start`) is solved first
(:func:`.curves_solver4.solve`); the grid's best point too when the shape
start did not converge, or always with ``always_grid`` (the single fit solves
both and keeps the lowest converged); logistic5 and biexponential from every start of
the single fit (:mod:`.curves_multistart`). logistic4 is written with slope > 0 (the
mirror of a falling curve, as the single fit reports it), biexponential with k_fast >
k_slow. Then, at the estimates, with ``e`` the weighted residuals and the tangent plane
``Q = sqrt(W) J R^-1``: standard errors ``sigma sqrt(diag (J'WJ)^-1)``,
leverages ``h = rowsums(Q²)``, Durbin-Watson's d and its p-value from Q's
moments (:func:`service.core.checks.kernels.dw_p`), Koenker's Breusch-Pagan
against x, the outlier/influence counts with the single fit's cut-offs, and the
lack-of-fit F against pure error (conventions of
:mod:`service.core.checks.diagnostics`).
"""

from __future__ import annotations

import math

import numba
import numpy as np

from service.core.batch.curves_grid import grid_start
from service.core.batch.curves_models import (
    BIEXPONENTIAL,
    GAUSSIAN_PEAK,
    L4_LINEAR,
    L4_LOG,
    LINEAR_COLUMNS,
    N_PARAMETERS,
    evaluate,
    on_log_x,
)
from service.core.batch.curves_multistart import attempt, is_multistart, solve_starts
from service.core.batch.curves_points import (
    pool,
    read_series,
    shapiro_normals,
    shapiro_w_p,
    sort_order,
    tangent_basis4,
    tangent_sums,
)
from service.core.batch.curves_solver import SMALL_GRADIENT, factor_and_norms, scratch_rows
from service.core.batch.curves_solver4 import solve
from service.core.batch.curves_starts import levels, shape_start
from service.core.checks.kernels import chi2_tail, dw_p, dw_traces

STATS = ("rss", "tss", "sum_log_w", "relative_offset", "iterations", "termination", "start",
         "durbin_watson", "durbin_watson_p", "breusch_pagan", "breusch_pagan_p",
         "lack_of_fit_f", "lack_of_fit_df", "pure_error_df", "n_outliers", "n_influential",
         "n_high_leverage", "n_influential_outliers", "n_high_leverage_influential_outliers",
         "max_correlation", "shapiro_wilk", "shapiro_wilk_p")
"""Columns of the ``stats`` output, in order."""
S = {name: i for i, name in enumerate(STATS)}
SHAPE, GRID, REWRITTEN = 0, 1, 5   # the start a series' fit came from (curves_post.STARTS)
SAME_RSS = 1e-9             # as builtin.fit.SAME_RSS
EXACT_RTOL = 1e-13          # as nonlinear.analysis.EXACT_RTOL
_RSS, _TSS, _LOGW, _OFFSET, _ITER, _TERM, _START = 0, 1, 2, 3, 4, 5, 6
_DW, _DWP, _BP, _BPP, _LOF, _LOFDF, _PUREDF = 7, 8, 9, 10, 11, 12, 13
_NOUT, _NINF, _NHIGH, _NBOTH, _NLEVER, _CORR, _SW, _SWP = 14, 15, 16, 17, 18, 19, 20, 21


@numba.njit(cache=True, nogil=True, error_model="numpy", inline="always")
def _summary(p, x, y, w, sw, f, js, low, d, rss, cut_t, cut_cook, q, e, out, est_se,
             sw_coef, srt, work, sw_normal):
    """Inference and residual checks at the estimates into ``out`` (stats row) and ``est_se``.

    ``js`` is the scaled weighted Jacobian (p x n), ``low`` the Cholesky factor of ``js'js`` and
    ``d`` the column norms (as :func:`.curves_solver4.solve` leaves them); ``work``: (3p + 1, p)."""
    n = y.size
    df = n - p
    sigma2 = rss / df
    inv, cov = work[:p], work[p:2 * p]   # inverse of the Cholesky factor, (Js'Js)^-1
    gram, dq = work[2 * p:3 * p], work[3 * p]
    inv[:, :] = 0.0
    for j in range(p):
        inv[j, j] = 1.0 / low[j, j]
        for i in range(j + 1, p):
            t = 0.0
            for k in range(j, i):
                t -= low[i, k] * inv[k, j]
            inv[i, j] = t / low[i, i]
    for j in range(p):                   # (Js'Js)^-1 = inv' inv, scaled
        for k in range(j + 1):
            t = 0.0
            for i in range(j, p):
                t += inv[i, j] * inv[i, k]
            cov[j, k] = cov[k, j] = t
    for j in range(p):
        est_se[j] = math.sqrt(sigma2 * cov[j, j]) / d[j]
    worst = 0.0
    for j in range(p):                   # 1 / sqrt(cov[j, j]) (dq: scratch here)
        dq[j] = 1.0 / math.sqrt(cov[j, j])
    for j in range(p):
        for k in range(j):
            worst = max(worst, abs(cov[j, k]) * dq[j] * dq[k])
    out[_CORR] = worst
    if p == 4:                           # the same sums unrolled: a loop LLVM vectorizes
        tangent_basis4(inv, js, q, n)
    for i in range(n if p != 4 else 0):
        for k in range(p):
            t = 0.0
            for j in range(k + 1):
                t += inv[k, j] * js[j, i]
            q[k, i] = t
    dd = ss = 0.0
    xbar = 0.0
    for i in range(n):
        e[i] = sw[i] * (y[i] - f[i])
        ss += e[i] * e[i]
        xbar += x[i]
        if i > 0:
            dd += (e[i] - e[i - 1]) * (e[i] - e[i - 1])
    xbar /= n
    out[_DW] = dd / ss if ss > 0 else np.nan
    out[_SW], out[_SWP] = shapiro_w_p(e, sw_coef, srt, sw_normal)
    tg, fg, faq = tangent_sums(q, p, n, gram, dq)
    tr1, tr2 = dw_traces(n, tg, fg, faq)
    out[_DWP] = dw_p(out[_DW], n - p, tr1, tr2)
    sxx = szx = sz = szz = 0.0           # Breusch-Pagan's sums, in the loop of the counts
    n_out = n_inf = n_high = n_both = n_lever = 0
    # the single fit's tests on squares, multiplied out (no division; the same at h = 1): Cook's
    # e² h / (p sigma² (1-h)²) > cut, studentized e² > t² (rss (1-h) - e²) / (df-1) >= 0
    cut_t2, cook_bar, high_bar, df1 = cut_t * cut_t, cut_cook * p * sigma2, 2.0 * p / n, df - 1.0
    for i in range(n):
        sxx += (x[i] - xbar) * (x[i] - xbar)
        zc = e[i] * e[i] - ss / n
        sz += zc
        szx += zc * (x[i] - xbar)
        szz += zc * zc
        if p == 4:
            h = q[0, i] * q[0, i] + q[1, i] * q[1, i] + q[2, i] * q[2, i] + q[3, i] * q[3, i]
        else:
            h = 0.0
            for k in range(p):
                h += q[k, i] * q[k, i]
        one_h = 1.0 - h
        e2 = e[i] * e[i]
        num = rss * one_h - e2
        outlier = (df > 1) & (num >= 0) & (e2 * df1 > cut_t2 * num)
        influential = e2 * h > cook_bar * (one_h * one_h)
        high = h > high_bar
        n_out += outlier
        n_inf += influential
        n_high += high
        n_both += outlier and influential
        n_lever += outlier and influential and high
    out[_NOUT], out[_NINF], out[_NHIGH] = n_out, n_inf, n_high
    out[_NBOTH], out[_NLEVER] = n_both, n_lever
    lm = n * (sz * sz / n + szx * szx / sxx) / szz if szz > 0 else np.nan
    out[_BP] = lm
    out[_BPP] = chi2_tail(1, lm) if n > 2 and szz > 0 else np.nan


@numba.njit(cache=True, nogil=True, error_model="numpy")
def fit_rows(fid, x, y, w, offsets, rows, cut_t, cut_cook, sw_start, sw_coef, always_grid,
             est, se, stats, status):
    """Fit the series ``rows`` (indices into ``offsets``) with family ``fid``.

    ``w`` holds the weights (empty when none: all ones); ``cut_t[n]`` and ``cut_cook[n]`` the
    outlier and Cook's distance cut-offs for ``n`` points, ``sw_coef[sw_start[n]:][:n]``
    the Shapiro-Wilk weights (``sw_start[n]`` -1: not tested). Writes row ``r`` of
    ``est``, ``se`` (G x p) and ``stats`` (G x len(STATS)), and ``status[r]``: 0 fitted
    here, 1 for the single-fit engine.
    """
    p = N_PARAMETERS[fid]
    lin = LINEAR_COLUMNS[fid]
    log_x = on_log_x(fid)
    nmax = 1
    for r in rows:
        nmax = max(nmax, offsets[r + 1] - offsets[r])
    u_all, sw_all = np.empty(nmax), np.empty(nmax)
    weighted, ones = w.size > 0, np.ones(nmax)
    f, v, lev_all, means_all = np.empty(nmax), np.empty(nmax), np.empty(nmax), np.empty(nmax)
    sw_normals = shapiro_normals(nmax)      # Shapiro-Wilk's p: what depends on n only
    e_all, srt_all = np.empty(nmax), np.empty(nmax)
    order_all, which_all = np.empty(nmax, dtype=np.int64), np.empty(nmax, dtype=np.int64)
    fj = np.empty((p + 1) * nmax)           # the curve and its gradient at the pooled u
    basis_work = np.empty(2 * p + nmax)     # scratch of the linear columns (basis)
    jac, mats = np.empty(p * nmax), np.empty((scratch_rows(p), p))
    work = np.empty((3 * p + 1, p))
    cols_all, q = np.empty((lin, nmax)), np.empty((p, nmax))
    coef, nl, theta, best = np.empty(lin), np.empty(3), np.empty(p), np.empty(p)
    ul_all, yl_all, swl_all = np.empty(nmax), np.empty(nmax), np.empty(nmax)
    a_before = b_before = 0
    for r in rows:
        a, b = offsets[r], offsets[r + 1]
        n = b - a
        xs, ys, ws = x[a:b], y[a:b], (w[a:b] if weighted else ones[:n])
        u, sw, cols = u_all[:n], sw_all[:n], cols_all[:, :n]
        status[r] = 1
        # u and sqrt(w); the sums for the exact-fit test and TSS. u_all still holds the u of
        # the series before (x[a_before:b_before]): a point at its x keeps its u
        zz, sw_total, swy, logw, same_x = read_series(xs, ys, ws, log_x, x[a_before:b_before],
                                                      u, sw)
        a_before, b_before = a, b
        order, which = order_all[:n], which_all[:n]
        if not same_x:                  # the x of the series before: its order stands
            sort_order(u, order)
        k, ss_pure = pool(u, ys, ws, order, ul_all, yl_all, swl_all, which)
        lev, means, m = ul_all, yl_all, k    # unit weights: the pools' means, bit for bit
        if weighted:
            lev, means = lev_all, means_all
            m = levels(u, ys, order, lev, means)
        pooled = (ul_all, yl_all, swl_all, ss_pure, k)
        found, best_rss, start, spent, current = False, np.inf, SHAPE, 0, False
        code, offset, fresh, settle = -1, np.nan, False, 0
        if is_multistart(fid):          # logistic5, biexponential: every start, as the single fit
            found, best_rss, start, spent, current, code, offset, unsure, settle = \
                solve_starts(fid, xs, u, ys, lev, means, m, v[:n], pooled, n, cols, coef, theta,
                             best, mats, fj, basis_work)
            if unsure:
                continue
        if shape_start(fid, xs, u, ys, lev, means, m, nl, v[:n]):     # (False for those)
            ok, rss, off, iters, c, fresh = attempt(fid, nl, n, pooled, cols, coef, theta,
                                                     mats, fj, basis_work)
            spent += iters
            if ok:
                found, best_rss, current, code, offset = True, rss, True, c, off
                best[:] = theta
        if (always_grid or not found) and grid_start(fid, xs, u, ys, sw, cols, coef, nl,
                                                       basis_work):
            ok, rss, off, iters, c, fresh = attempt(fid, nl, n, pooled, cols, coef, theta,
                                                     mats, fj, basis_work)
            spent += iters
            current = False
            if ok and (not found or rss < best_rss * (1.0 - SAME_RSS)):
                found, best_rss, start, current, code, offset = True, rss, GRID, True, c, off
                best[:] = theta
        if not found:
            continue
        theta[:] = best
        rss = best_rss
        if (fid == L4_LOG or fid == L4_LINEAR) and theta[2] < 0:   # the same curve, slope > 0
            theta[0], theta[1], theta[2] = best[1], best[0], -best[2]
            current = False
        if fid == GAUSSIAN_PEAK and theta[3] < 0:                  # the same curve, width > 0
            theta[3] = -theta[3]
            current = False
        if fid == BIEXPONENTIAL and theta[2] < theta[3]:           # k_fast > k_slow
            theta[0], theta[1], theta[2], theta[3] = best[1], best[0], best[3], best[2]
            current, start = False, start + REWRITTEN
        if not current:     # the solver's state (factor, column norms) at the kept estimates
            code, rss, offset, _, fresh = solve(fid, theta, ul_all[:k], yl_all[:k],
                                                swl_all[:k], mats, 200, ss_pure, n, fj)
        if code > SMALL_GRADIENT or not rss > EXACT_RTOL * EXACT_RTOL * zz or n <= p + 1:
            continue
        low, d = factor_and_norms(mats, p)
        js = jac[:p * n].reshape((p, n))
        f_pool, jl = fj[:k], fj[k:(p + 1) * k].reshape((p, k))
        if not fresh and not evaluate(fid, theta, ul_all[:k], f_pool, jl):  # per distinct u
            continue
        for i in range(n):
            f[i] = f_pool[which[i]]
        for j in range(p):                   # the scaled weighted Jacobian of the points
            inv_d = 1.0 / d[j]
            for i in range(n):
                js[j, i] = jl[j, which[i]] * (sw[i] * inv_d)
        row = stats[r]
        row[_RSS], row[_OFFSET], row[_ITER], row[_TERM], row[_START] = \
            rss, offset, spent, code, start
        at = sw_start[n]
        _summary(p, xs, ys, ws, sw, f[:n], js, low, d, rss, cut_t[n], cut_cook[n], q,
                 e_all[:n], row, se[r], sw_coef[max(at, 0):at + n if at >= 0 else 0],
                 srt_all[:n], work, sw_normals[n])
        if not math.isfinite(row[_BP]) and n > 2:      # constant x: the single fit decides
            continue
        row[_LOF] = row[_LOFDF] = row[_PUREDF] = np.nan
        if k < n:
            row[_LOFDF], row[_PUREDF] = k - p, n - k
            if k - p > 0 and ss_pure > 0:
                row[_LOF] = (max(rss - ss_pure, 0.0) / (k - p)) / (ss_pure / (n - k))
        tss = 0.0
        for i in range(n):
            tss += ws[i] * (ys[i] - swy / sw_total) ** 2
        row[_TSS], row[_LOGW] = tss, logw
        est[r] = theta
        if fid == BIEXPONENTIAL:     # the report's order: a_fast, k_fast, a_slow, k_slow
            est[r, 1], est[r, 2] = theta[2], theta[1]
            se[r, 1], se[r, 2] = se[r, 2], se[r, 1]
        status[r] = settle      # 0, or provisional: failed starts (curves_multistart)
