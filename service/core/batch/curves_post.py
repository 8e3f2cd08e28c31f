"""Finishing the compiled rows of a nonlinear batch: whole-fit measures, tests and flags.

Vectorized over the rows the kernel fitted (:mod:`.curves_kernel`), with the
conventions of the single fit (:mod:`service.core.nonlinear.inference`,
:mod:`service.core.checks.diagnostics`, :mod:`service.core.checks.flags`,
:mod:`service.core.nonlinear.flags`):

* sigma ``sqrt(RSS/df)``, R² about the weighted mean, adjusted R², the Gaussian
  log-likelihood at the ML variance plus ``0.5 sum(log w)``, AIC, AICc, BIC with
  k = number of parameters;
* with known SDs (``known``, weights ``1/SD²``: :mod:`service.core.checks.known_sd`) the
  same fit read otherwise: standard errors from ``(J'WJ)^-1`` unscaled (the kernel's,
  which carry the factor sigma, divided by it), the log-likelihood at the known
  variances ``-0.5 (n log 2 pi - sum(log w) + RSS)``, and the chi-square
  goodness-of-fit test of the weighted RSS on ``n - p`` df (``chi_square_fit_failed``,
  serious, below ``TEST_ALPHA``); the summary carries no limits, so no critical value;
* lack-of-fit p from ``F(k - p, n - k)`` (Shapiro-Wilk of the weighted residuals comes
  from the kernel, :func:`.curves_points.shapiro_w_p`);
* flags at the per-test level ``TEST_ALPHA``; influence and leverage are info
  unless one of their points is also an outlier. ``poorly_determined_parameter``
  rests on the relative standard error alone: profile limits (the single fit's
  other evidence for it) are not computed in a batch summary, so a row can lack the flag
  where the single fit has it (an unbounded profile side), never the reverse; no cheap
  rule decides a profile side (docs/scaling.md, "Flags of a compiled row").
"""

from __future__ import annotations

import math

import numpy as np
from scipy import special

from service.core.batch.curves_flags import flag_masks
from service.core.batch.curves_kernel import S
from service.core.batch.curves_solver import CODES
from service.core.batch.residuals import RESIDUAL_TESTS, tested_only

LOG_2PI = math.log(2 * math.pi)
_FIRST = ("shape", "grid_best", "grid_local_2", "grid_local_3", "grid_local_4")
STARTS = _FIRST + tuple(f"{name}_rewritten" for name in _FIRST)
"""Start codes of the kernel (:mod:`.curves_kernel`, :mod:`.curves_multistart`): the
start, then the same written in the family's convention and solved again."""


def finish(out: dict, rows, stats: np.ndarray, n: np.ndarray, p: int,
           known: bool = False) -> None:
    """Write the columns of the compiled ``rows`` (an index array or a slice; ``stats``
    and ``n``: their kernel rows and lengths; ``known``: weights are 1/SD² of known
    errors)."""
    cols = out["columns"]
    df = n - p
    rss, tss = stats[:, S["rss"]], stats[:, S["tss"]]
    sigma = np.sqrt(rss / df)
    with np.errstate(all="ignore"):
        r2 = np.where(tss > 0, 1.0 - rss / tss, np.nan)
        if known:
            llf = -0.5 * (n * LOG_2PI - stats[:, S["sum_log_w"]] + rss)
            _known_sd(out, rows, sigma, rss, df)
        else:
            llf = -0.5 * n * (LOG_2PI + np.log(rss / n) + 1.0) + 0.5 * stats[:, S["sum_log_w"]]
        aic = -2.0 * llf + 2.0 * p
        lof_f = stats[:, S["lack_of_fit_f"]]
        lof_p = np.where(np.isfinite(lof_f), special.fdtrc(stats[:, S["lack_of_fit_df"]],
                                                            stats[:, S["pure_error_df"]], lof_f),
                         np.nan)
        cols["aicc"][rows] = np.where(n - p - 1 > 0, aic + 2.0 * p * (p + 1) / (n - p - 1),
                                      np.nan)
    cols["n"][rows], cols["df_residual"][rows] = n, df
    cols["rss"][rows], cols["sigma"][rows] = rss, sigma
    cols["r_squared"][rows] = r2
    cols["adj_r_squared"][rows] = 1.0 - (1.0 - r2) * (n - 1) / df
    cols["aic"][rows], cols["bic"][rows] = aic, -2.0 * llf + p * np.log(n)
    cols["converged"][rows] = True
    cols["termination"][rows] = _names(CODES, stats[:, S["termination"]])
    cols["start_strategy"][rows] = _names(STARTS, stats[:, S["start"]])
    cols["iterations"][rows] = stats[:, S["iterations"]].astype(np.int64)
    cols["relative_offset"][rows] = stats[:, S["relative_offset"]]
    for name in RESIDUAL_TESTS:
        cols[name][rows] = tested_only(stats[:, S[name]], df)
    cols["lack_of_fit_f"][rows] = lof_f
    cols["lack_of_fit_p"][rows] = lof_p
    for name in ("n_outliers", "n_influential", "n_high_leverage"):
        cols[name][rows] = stats[:, S[name]].astype(np.int64)
    _flags(out, rows, stats, n, p)
    out["ok"][rows] = True
    out["compiled"][rows] = True


def _names(names: tuple[str, ...], codes: np.ndarray):
    """The name of each code (floats holding whole numbers): one name when all are equal
    (the common case: an object column filled with one string, no gathering)."""
    codes = codes.astype(np.int64)
    if codes.size and codes.min() == codes.max():
        return names[int(codes[0])]
    return np.asarray(names, dtype=object)[codes]


def _known_sd(out, rows, sigma, rss, df) -> None:
    """Unscaled standard errors and the chi-square test of the rows (known SDs)."""
    se = out["std_errors"]
    se[rows] = se[rows] / sigma[:, None]
    tested = (df >= 1) & np.isfinite(rss)
    cols = out["columns"]
    cols["chi_square_fit"][rows] = np.where(tested, rss, np.nan)
    cols["chi_square_fit_p"][rows] = np.where(tested, special.chdtrc(np.maximum(df, 1), rss),
                                              np.nan)


def _flags(out, rows, stats, n, p) -> None:
    cols = out["columns"]
    cols["flags"][rows], cols["flag_levels"][rows] = flag_masks(
        stats, out["estimates"][rows], out["std_errors"][rows], n, p,
        *(cols[name][rows] for name in ("chi_square_fit_p", "lack_of_fit_p", "shapiro_wilk_p",
                                        "breusch_pagan_p", "durbin_watson_p")))
