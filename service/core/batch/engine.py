"""Drive the compiled batch kernel: tables before, p-values and flags after.

:func:`fit_chunk` fits one chunk of series of one model with
:func:`service.core.batch.kernel.fit_rows` and returns a :class:`ChunkResult`
for the rows it fitted, plus the rows it hands to ``fit_series`` (too few
distinct x, an F at its critical value, an ill-conditioned design, extreme
magnitudes). Conventions, thresholds and flag rules are those of
:mod:`service.core.polynomial.summary`, :mod:`service.core.polynomial.diagnostics` and
:mod:`service.core.checks.flags` (tests at the per-test level ``TEST_ALPHA``: the
Bonferroni outlier limit, lack of fit, Shapiro-Wilk, Breusch-Pagan and the one-sided
Durbin-Watson p-value of :mod:`service.core.checks.durbin_watson`, and with known SDs the
chi-square goodness-of-fit test of :mod:`service.core.checks.known_sd`; ``h > 2p/n`` and
Cook's distance above the median of ``F(p, n - p)`` are info unless one of their points
is also an outlier). Each flag carries its severity (:data:`SEVERITIES`, two bits per
code in the ``flag_levels`` column).
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache

import numpy as np
from scipy import special

from service.core.batch import kernel as kern
from service.core.batch import residuals as resid_checks
from service.core.batch.ftail import log_beta_table
from service.core.checks import durbin_watson
from service.core.checks import flags as single
from service.core.checks.diagnostics import OUTLIER_ALPHA
from service.core.checks.lack_of_fit import lack_of_fit
from service.core.checks.shapiro_tables import SHAPIRO_MAX_N, shapiro_weights
from service.core.data.inputs import TINY_LIMIT, magnitude_limit
from service.core.polynomial.decomposition import EXACT_FIT_RTOL  # the one exact-fit cut-off
from service.core.polynomial.summary import LEVERAGE_ONE  # leave-one-out residual undefined above

FLAG_CODES = ("chi_square_fit_failed", "exact_fit", "no_residual_df", "few_points_per_parameter",
              "ill_conditioned_design", "lack_of_fit", "non_normal_residuals",
              "non_constant_variance", "serial_correlation", "outliers",
              "influential_points", "high_leverage", "extrapolation")
BIT = {code: 1 << i for i, code in enumerate(FLAG_CODES)}
SEVERITIES = ("info", "caution", "serious")   # level 0, 1, 2: bits 2i, 2i+1 of flag_levels
SC = {name: i for i, name in enumerate(kern.SC)}


@dataclass(frozen=True, slots=True)
class BlockSpec:
    """What to fit: candidate degrees and how to choose among them."""

    min_degree: int
    max_degree: int
    intercept: bool
    select: str          # one of SELECT_METHODS, or "fixed"
    alpha: float
    need_press: bool
    known: bool = False  # weights are 1/SD² of known errors (weighting "known_sd")

    @property
    def c(self) -> int:
        return 1 if self.intercept else 0


@dataclass(frozen=True, slots=True)
class ChunkResult:
    """Fitted rows of one chunk (internal): per-series columns and point indices."""

    rows: np.ndarray                   # input rows fitted here
    columns: dict                      # name -> (k,) values, names of batch_results.SCALARS
    coef: np.ndarray                   # (k, P)
    se: np.ndarray
    candidates: dict                   # measure -> (k, m)
    outliers: dict                     # row -> tuple of point indices
    influential: dict


@lru_cache(maxsize=64)
def _crit(alpha: float, size: int) -> np.ndarray:
    """``F(1, df; 1 - alpha)`` for df = 0 .. size - 1 (df 0 uses df 1)."""
    return special.fdtri(1, np.maximum(np.arange(size), 1), 1 - alpha)


@lru_cache(maxsize=64)
def _log_beta(size: int) -> np.ndarray:
    return log_beta_table(size)


@lru_cache(maxsize=4096)
def _limits(n: int, P: int) -> tuple[np.ndarray, np.ndarray]:
    """Bonferroni outlier t limit and Cook's cut-off by number of coefficients p = 0..P."""
    p = np.arange(P + 1, dtype=float)
    df = n - p
    with np.errstate(all="ignore"):
        bonf = np.where(df > 1, special.stdtrit(np.maximum(df - 1, 1),
                                                1 - OUTLIER_ALPHA / (2 * n)), np.nan)
        cook = special.fdtri(np.maximum(p, 1), np.maximum(df, 1), 0.5)
    return bonf, cook


@lru_cache(maxsize=16)
def _binomials(P: int, start: int) -> np.ndarray:
    m = np.arange(start, start + P)
    return special.comb(m[None, :], m[:, None])   # [i, j] = C(m_j, m_i), 0 for i > j


def tables(lengths: np.ndarray, P: int) -> tuple[np.ndarray, ...]:
    """Per-length tables of the kernel.

    ``(slot, bonf, cook, magnitude, sw_start, sw_coef)``: ``slot[n]`` indexes the
    rows of the others; ``magnitude`` is :func:`service.core.data.inputs.magnitude_limit`.
    """
    uniq = np.unique(lengths)
    slot = np.full(int(uniq[-1]) + 1 if uniq.size else 1, -1, dtype=np.int64)
    slot[uniq] = np.arange(uniq.size)
    bonf = np.empty((uniq.size, P + 1))
    cook = np.empty((uniq.size, P + 1))
    magnitude = np.empty(uniq.size)
    sw_start = np.zeros(uniq.size, dtype=np.int64)
    parts, at = [], 0
    for i, n in enumerate(uniq.tolist()):
        bonf[i], cook[i] = _limits(n, P)
        magnitude[i] = magnitude_limit(n)
        sw_start[i] = at
        if 3 <= n <= SHAPIRO_MAX_N:
            parts.append(shapiro_weights(n))
            at += n
    sw_coef = np.concatenate(parts) if parts else np.zeros(1)
    return slot, bonf, cook, magnitude, sw_start, sw_coef


def fit_chunk(u, z, w, offsets, rows, spec: BlockSpec, tabs, marks, resid):
    """Fit the series ``rows``; return ``(ChunkResult, rows for fit_series)``.

    ``u``, ``z``, ``w`` are the flat x, y (fitting scale) and weights (None:
    unweighted); ``tabs`` comes from :func:`tables`; ``marks`` (uint8) and
    ``resid`` (float) are flat scratch arrays the size of ``u``.
    """
    G = rows.size
    m = spec.max_degree - spec.min_degree + 1
    P = spec.max_degree + spec.c
    lengths = offsets[rows + 1] - offsets[rows]
    sc = np.full((G, len(kern.SC)), np.nan)
    cand = np.empty((len(kern.CAND), G, m))
    coef, se = np.empty((G, P)), np.empty((G, P))
    status = np.empty(G, dtype=np.int8)
    size = int(lengths.max(initial=1)) + 1
    crit, log_beta = _crit(spec.alpha, size), _log_beta(size)
    kern.fit_rows(u, z, np.empty(1) if w is None else w, w is None, offsets, rows,
                  spec.min_degree, spec.max_degree, spec.intercept,
                  kern.SELECT_CODES[spec.select], spec.need_press, spec.known, crit, log_beta,
                  *tabs[:4],
                  _binomials(P, 1 - spec.c), EXACT_FIT_RTOL ** 2, LEVERAGE_ONE,
                  single.COND_CAUTION, TINY_LIMIT, sc, cand, coef, se, marks, resid, status)
    ok = status == kern.OK
    fitted = rows
    if not ok.all():
        sc, cand, coef, se, fitted = sc[ok], cand[:, ok], coef[ok], se[ok], rows[ok]
    cols = {name: sc[:, SC[name]] for name in ("n", "degree", "df_residual", "rss", "sigma",
                                              "r_squared", "adj_r_squared", "aic", "aicc",
                                              "bic", "press", "shapiro_wilk", "durbin_watson",
                                              "breusch_pagan", "n_outliers", "n_influential",
                                              "n_high_leverage")}
    cands = {name: cand[i] for i, name in enumerate(kern.CAND)}
    n, degree = cols["n"], cols["degree"]
    cols["shapiro_wilk"], cols["shapiro_wilk_p"] = _shapiro_w(resid, offsets, fitted, n,
                                                              cols["shapiro_wilk"], tabs)
    with np.errstate(all="ignore"):
        cols["breusch_pagan_p"] = np.where(np.isnan(cols["breusch_pagan"]), np.nan,
                                           special.chdtrc(np.maximum(degree, 1),
                                                          cols["breusch_pagan"]))
    cols["lack_of_fit_f"], cols["lack_of_fit_p"] = _lack_of_fit(
        u, z, w, offsets, fitted, sc[:, SC["repeats"]] > 0, cols["rss"], sc[:, SC["p"]])
    cols["chi_square_fit"], cols["chi_square_fit_p"] = _chi_square(
        cols["rss"], cols["df_residual"], spec.known)
    p = sc[:, SC["p"]]
    cols["durbin_watson_p"] = durbin_watson.p_value(
        cols["durbin_watson"], n - p, *durbin_watson.traces(
            n, sc[:, SC["dw_trace_g"]], sc[:, SC["dw_frob_g"]], sc[:, SC["dw_frob_aq"]]))
    for name in resid_checks.RESIDUAL_TESTS:
        cols[name] = resid_checks.tested_only(cols[name], cols["df_residual"])
    cols["flags"], cols["flag_levels"] = _flags(cols, sc, p, sc[:, SC["exact"]] > 0,
                                                sc[:, SC["condition_number"]])
    outliers, influential = _points(marks, offsets, fitted, cols)
    return (ChunkResult(fitted, cols, coef, se, cands, outliers, influential), rows[~ok])


def _chi_square(rss, df, known: bool) -> tuple[np.ndarray, np.ndarray]:
    """Weighted RSS against chi-square(n - p) with known SDs
    (:func:`service.core.checks.known_sd.chi_square_fit`); NaN without them or without df."""
    if not known:
        return np.full(rss.shape, np.nan), np.full(rss.shape, np.nan)
    tested = (df >= 1) & np.isfinite(rss)
    with np.errstate(all="ignore"):
        return (np.where(tested, rss, np.nan),
                np.where(tested, special.chdtrc(np.maximum(df, 1), rss), np.nan))


def _lack_of_fit(u, z, w, offsets, rows, repeats, rss, p):
    """Lack-of-fit F and p for the rows whose x repeats (NaN elsewhere)."""
    lof_f = np.full(rows.size, np.nan)
    lof_p = np.full(rows.size, np.nan)
    for g in np.flatnonzero(repeats):
        a, b = offsets[rows[g]], offsets[rows[g] + 1]
        sw_row = None if w is None else np.sqrt(w[a:b])
        zw_row = z[a:b] if sw_row is None else z[a:b] * sw_row
        lof = lack_of_fit(u[a:b], zw_row, sw_row, float(rss[g]), int(p[g]))
        if lof is not None:
            lof_f[g], lof_p[g] = lof.f, lof.p_value
    return lof_f, lof_p


def _flags(cols, sc, p, exact, cond) -> tuple[np.ndarray, np.ndarray]:
    """Bit mask over :data:`FLAG_CODES` and their severities (two bits per code), by the
    rules of :mod:`service.core.checks.flags`."""
    n, alpha = cols["n"], single.TEST_ALPHA
    mask = np.zeros(n.shape, dtype=np.int64)
    levels = np.zeros(n.shape, dtype=np.int64)
    info, caution, serious = range(3)
    with np.errstate(invalid="ignore"):
        for code, hit, level in (
                ("chi_square_fit_failed", cols["chi_square_fit_p"] < alpha, serious),
                ("exact_fit", exact, caution),
                ("no_residual_df", n == p, serious),
                ("few_points_per_parameter", (n != p) & (n < single.POINTS_PER_PARAMETER * p),
                 info),
                ("ill_conditioned_design", cond > single.COND_CAUTION,
                 np.where(cond > single.COND_SERIOUS, serious, caution)),
                ("lack_of_fit", cols["lack_of_fit_p"] < alpha, serious),
                ("non_normal_residuals", cols["shapiro_wilk_p"] < alpha, caution),
                ("non_constant_variance", cols["breusch_pagan_p"] < alpha, caution),
                ("serial_correlation", cols["durbin_watson_p"] < alpha, caution),
                ("outliers", cols["n_outliers"] > 0, caution),
                ("influential_points", cols["n_influential"] > 0,
                 np.where(sc[:, SC["n_influential_outliers"]] > 0, caution, info)),
                ("high_leverage", cols["n_high_leverage"] > 0,
                 np.where(sc[:, SC["n_leveraged_outliers"]] > 0, caution, info))):
            shift = FLAG_CODES.index(code)
            mask |= np.where(hit, BIT[code], 0)
            levels |= np.where(hit, np.left_shift(level, 2 * shift), 0)
    return mask, levels


def _shapiro_w(resid, offsets, rows, n, spread, tabs) -> tuple[np.ndarray, np.ndarray]:
    """Shapiro-Wilk W and p from the kernel's residuals and sums of squared deviations."""
    w = np.full(rows.size, np.nan)
    p = np.full(rows.size, np.nan)
    need = np.flatnonzero(np.isfinite(spread))
    if need.size == 0:
        return w, p
    lengths = n[need].astype(np.int64)
    starts = offsets[rows[need]]
    width = int(lengths.max())
    if np.all(lengths == width) and np.all(np.diff(starts) == width):  # back to back
        block = resid[starts[0]:starts[0] + need.size * width].reshape(need.size, width)
    else:
        block = resid_checks.gather_padded(resid, starts, lengths, width)
    block.sort(axis=1)     # in place: the residuals are scratch once the kernel is done
    slot, *_, sw_start, sw_coef = tabs
    w[need], p[need] = resid_checks.shapiro_w_p(block, lengths, slot, sw_start, sw_coef,
                                                spread[need])
    return w, p


def _points(marks, offsets, rows, cols):
    """Indices (within each series) of the outlying and of the influential points."""
    found = ({}, {})
    for which, (count, bit) in enumerate(((cols["n_outliers"], resid_checks.OUTLIER_BIT),
                                          (cols["n_influential"], resid_checks.INFLUENTIAL_BIT))):
        hit_rows = rows[count > 0]
        if hit_rows.size == 0:
            continue
        where, index = resid_checks.collect(marks, offsets, hit_rows, bit)
        cuts = (np.flatnonzero(np.diff(where)) + 1).tolist()
        index = index.tolist()
        for g, a, b in zip(hit_rows[where[[0, *cuts]]].tolist(), [0, *cuts],
                           [*cuts, len(index)], strict=True):
            found[which][g] = tuple(index[a:b])
    return found
