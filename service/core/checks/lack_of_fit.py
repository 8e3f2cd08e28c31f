"""The lack-of-fit test against pure error, and counting distinct x values.

(The sequential ANOVA table of a fit is built in :mod:`service.core.polynomial.tables`.)
"""

from __future__ import annotations

import numpy as np
from scipy import special

from service.core.results import LackOfFit

NAN = float("nan")


def distinct_count(x: np.ndarray) -> int:
    """Number of distinct values (a fast path for already sorted x)."""
    # x[i+1] >= x[i] and x[i+1] != x[i] are the signs of np.diff(x) without a float array
    if np.all(x[1:] >= x[:-1]):
        return 1 + int(np.count_nonzero(x[1:] != x[:-1]))
    return int(np.unique(x).size)


def _levels(x: np.ndarray) -> tuple[int, np.ndarray]:
    d = np.diff(x)
    if np.all(d >= 0):
        inverse = np.concatenate(([0], np.cumsum(d != 0)))
        return int(inverse[-1]) + 1, inverse
    levels, inverse = np.unique(x, return_inverse=True)
    return levels.size, inverse


def lack_of_fit(x: np.ndarray, zw: np.ndarray, sqrt_w: np.ndarray | None, rss: float,
                p: int, distinct: int | None = None) -> LackOfFit | None:
    """Lack-of-fit F test; None when no x value repeats.

    ``distinct`` (number of distinct x, computed when None) lets the caller
    skip the grouping when every x is different.

    Pure-error SS is the (weighted) scatter of y about the mean of its own x
    level; lack-of-fit SS = residual SS - pure-error SS, on ``levels - p``
    df. The F is undefined (nan) when ``levels <= p`` or pure error is zero.
    """
    n = x.size
    if distinct is None:
        distinct = distinct_count(x)
    if distinct == n:
        return None
    k, inverse = _levels(x)
    w = np.ones(n) if sqrt_w is None else sqrt_w * sqrt_w
    z = zw if sqrt_w is None else zw / sqrt_w
    sw = np.bincount(inverse, weights=w, minlength=k)
    means = np.bincount(inverse, weights=w * z, minlength=k) / sw
    dev = z - means[inverse]
    ss_pure = float(np.sum(w * dev * dev))
    df_pure, df_lack = n - k, k - p
    ss_lack = max(rss - ss_pure, 0.0)
    with np.errstate(all="ignore"):
        if df_lack > 0 and ss_pure > 0:
            f = (ss_lack / df_lack) / (ss_pure / df_pure)
            pv = float(special.fdtrc(df_lack, df_pure, f))
        else:
            f = pv = NAN
    return LackOfFit(df_lack, ss_lack, df_pure, ss_pure, f, pv, k)
