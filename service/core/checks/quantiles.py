"""Cached Student t and F quantiles: fits of equal size and level reuse their critical values."""

from __future__ import annotations

from functools import lru_cache

from scipy import special


@lru_cache(maxsize=4096)
def t_quantile(df: int, q: float) -> float:
    """Student t quantile ``t_df(q)`` (``scipy.special.stdtrit``), cached."""
    return float(special.stdtrit(df, q))


@lru_cache(maxsize=4096)
def f_quantile(dfn: int, dfd: int, q: float) -> float:
    """F quantile ``F_{dfn, dfd}(q)`` (``scipy.special.fdtri``), cached like :func:`t_quantile`."""
    return float(special.fdtri(dfn, dfd, q))
