"""Cached Student t and F quantiles: fits of equal size and level reuse their critical values."""

from __future__ import annotations

import math
from functools import lru_cache

from scipy import special


@lru_cache(maxsize=4096)
def t_quantile(df: int, q: float) -> float:
    """Student t quantile ``t_df(q)`` (``scipy.special.stdtrit``), cached."""
    return float(special.stdtrit(df, q))


@lru_cache(maxsize=4096)
def f_quantile(dfn: int, dfd: int, q: float) -> float:
    """F quantile ``F_{dfn, dfd}(q)`` (``scipy.special.fdtri``), cached like :func:`t_quantile`.

    Where ``fdtri`` gives NaN for a tiny ``q`` (it does below about 1e-150 once
    ``dfn > 2``: say ``q = 1e-300``, a near-zero confidence level), the quantile comes from
    the leading term of the regularized incomplete beta function at 0,
    ``I_x(a, b) = x^a / (a B(a, b)) (1 + O(x))`` with ``a = dfn/2``, ``b = dfd/2`` and
    ``F = (b/a) x/(1 - x)`` (Abramowitz & Stegun 26.5.4 and 26.6.2): relative error
    ``O(x)``, far below rounding there.
    """
    value = float(special.fdtri(dfn, dfd, q))
    if value == value or not 0.0 < q < 1e-100:
        return value
    a, b = 0.5 * dfn, 0.5 * dfd
    log_x = (math.log(q) + math.log(a) + float(special.betaln(a, b))) / a
    x = math.exp(log_x)
    return (b / a) * x / (1.0 - x)
