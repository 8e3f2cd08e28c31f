"""The chosen fit's coefficient table and sequential ANOVA table.

Each power's sequential SS is the square of its effect in ``Q'y`` (the
orthogonal decomposition of the weighted response in entry order), so the
rows add up exactly to the regression SS. Without an intercept the first
row (``x``) is uncentred, as in NIST StRD's no-intercept datasets.

A coefficient's two-sided p-value ``P(|T_df| > |t|)`` equals the F(1, df)
upper tail at ``t²``; both tables' p-values come from one
``scipy.special.fdtrc`` call (it agrees with ``2 stdtr(df, -|t|)`` to ~1e-13
relative). At most 11 rows each: plain Python floats, the same IEEE
operations with fewer numpy calls.
"""

from __future__ import annotations

import math

import numpy as np
from scipy import special

from service.core.checks.known_sd import normal_quantile
from service.core.checks.quantiles import t_quantile
from service.core.polynomial.selection import term
from service.core.results import AnovaRow, Coefficient

NAN = float("nan")


def fit_tables(terms: tuple[str, ...], raw: np.ndarray, cov: np.ndarray, effects: np.ndarray,
               degree: int, intercept: bool, rss: float, df: int, level: float,
               known_sd: bool = False) -> tuple[tuple[Coefficient, ...], tuple[AnovaRow, ...]]:
    """Coefficient rows (estimate, std error, t, p, confidence limits at ``level``) and the
    sequential ANOVA rows (one per power in entry order, then the residual row with nan f/p).

    Parameters
    ----------
    terms : names of the coefficients.
    raw, cov : raw-power coefficients and their covariance (NaN where undefined).
    effects : ``Q'zw`` of the fit (float64 or longdouble); the powers' entries are used.
    rss, df : residual SS and df of the chosen fit (``rss`` 0.0 for an exact fit).
    known_sd : the weights are ``1/SD²`` of known errors: ``cov`` is unscaled and the
        coefficient tests and limits use the standard normal (the ANOVA F tests still use
        the residual mean square, which is valid either way).
    """
    est = raw.tolist()
    se = [math.sqrt(v) if v > 0 else (v if math.isnan(v) else 0.0)
          for v in cov.diagonal().tolist()]
    tval = [b / s if s > 0 else NAN for b, s in zip(est, se, strict=True)]
    c = 1 if intercept else 0
    ss = [v * v for v in np.asarray(effects[c:degree + c], dtype=float).tolist()]
    mse = rss / df if df > 0 else NAN
    f = [v / mse if rss > 0 else NAN for v in ss]
    if known_sd:  # P(|Z| > |z|) is the chi-square(1) upper tail at z²
        zq = normal_quantile(level)
        half = [zq * s if s > 0 else 0.0 for s in se]
        probs = special.chdtrc(1, [t * t for t in tval]).tolist()
        probs += special.fdtrc(1, df, f).tolist() if df > 0 else [NAN] * degree
    elif df > 0:
        tq = -t_quantile(df, (1.0 - level) / 2)  # upper tail from 1 - level (exact)
        half = [tq * s if s > 0 else 0.0 for s in se]
        probs = special.fdtrc(1, df, [t * t for t in tval] + f).tolist()
    else:
        half = [NAN] * len(est)
        probs = [NAN] * (len(est) + degree)
    k = len(est)
    coefficients = tuple(Coefficient(name, b, s, t, pv, b - h, b + h) for name, b, s, t, pv, h
                         in zip(terms, est, se, tval, probs[:k], half, strict=True))
    rows = [AnovaRow(term(j + 1), 1, ss[j], ss[j], f[j], probs[k + j]) for j in range(degree)]
    rows.append(AnovaRow("residual", df, rss, mse, NAN, NAN))
    return coefficients, tuple(rows)
