"""Formal residual tests vectorized across the rows of a block.

Each function takes weighted residuals ``e`` as rows of a ``(G, L)`` array,
0 where padded (a row's real points come first), and the per-row number of
real points. They reproduce, row by row, the single-series tests in
:mod:`service.core.diagnostics`:

* Shapiro-Wilk W and its p-value by Royston's approximation, algorithm AS R94
  (Royston 1995, *Applied Statistics* 44, 547-551) — the algorithm behind
  ``scipy.stats.shapiro``, whose output the tests use as the oracle;
* Durbin-Watson ``sum(diff(e)^2) / sum(e^2)`` in the given order;
* Breusch-Pagan in Koenker's studentized form, ``LM = n R^2`` of the
  centred ``e^2`` on the powers of ``t``, chi-squared on ``degree`` df.
"""

from __future__ import annotations

from functools import lru_cache

import numpy as np
from scipy import special

# AS R94 polynomial coefficients (Royston 1995), lowest power first.
_C1 = (0.0, 0.221157, -0.147981, -2.07119, 4.434685, -2.706056)
_C2 = (0.0, 0.042981, -0.293762, -1.752461, 5.682633, -3.582633)
_C3 = (0.544, -0.39978, 0.025054, -6.714e-4)
_C4 = (1.3822, -0.77857, 0.062767, -0.0020322)
_C5 = (-1.5861, -0.31082, -0.083751, 0.0038915)
_C6 = (-0.4803, -0.082676, 0.0030302)
_G = (-2.273, 0.459)
SHAPIRO_MAX_N = 5000  # upper limit of Royston's approximation (as service.core.normality)


def _poly(coefs, x):
    out = np.zeros_like(np.asarray(x, dtype=float)) + coefs[-1]
    for c in coefs[-2::-1]:
        out = out * x + c
    return out


def _scipy_weights(n: int) -> np.ndarray | None:
    """The AS R94 coefficients exactly as scipy computes them (its normal quantiles
    differ from ``ndtri`` in the 9th digit), or None if that private routine moved."""
    try:
        from scipy.stats._ansari_swilk_statistics import swilk
    except ImportError:  # pragma: no cover - depends on the scipy version
        return None
    a = np.zeros(n // 2)
    swilk(np.linspace(-1.0, 1.0, n), a, 0)
    return a


@lru_cache(maxsize=512)
def shapiro_weights(n: int) -> np.ndarray:
    """Antisymmetric AS R94 weights ``c`` (length n): ``W = (c . e_sorted)^2 / SS``."""
    half = n // 2
    a = np.zeros(half)
    ref = _scipy_weights(n) if n > 3 else None
    if ref is not None:
        a = ref
    elif n == 3:
        a[0] = np.sqrt(0.5)
    else:
        m = special.ndtri((np.arange(1, half + 1) - 0.375) / (n + 0.25))
        summ2 = 2.0 * float(m @ m)
        ssumm2 = np.sqrt(summ2)
        rsn = 1.0 / np.sqrt(n)
        a1 = float(_poly(_C1, rsn)) - m[0] / ssumm2
        if n > 5:
            a2 = -m[1] / ssumm2 + float(_poly(_C2, rsn))
            fac = np.sqrt((summ2 - 2 * m[0] ** 2 - 2 * m[1] ** 2)
                          / (1 - 2 * a1 ** 2 - 2 * a2 ** 2))
            a[1] = a2
            first = 2
        else:
            fac = np.sqrt((summ2 - 2 * m[0] ** 2) / (1 - 2 * a1 ** 2))
            first = 1
        a[0] = a1
        a[first:] = -m[first:] / fac
    c = np.zeros(n)
    c[:half] = -a
    c[n - half:] = a[::-1]
    c.setflags(write=False)
    return c


def _shapiro_p(w: np.ndarray, n: np.ndarray) -> np.ndarray:
    """Royston's p-value for W (AS R94), per row."""
    with np.errstate(all="ignore"):
        y = np.log1p(-w)
        big = n >= 12
        ln = np.log(n)
        m_big, s_big = _poly(_C5, ln), np.exp(_poly(_C6, ln))
        gamma = _poly(_G, n)
        y_small = -np.log(gamma - y)
        m_small, s_small = _poly(_C3, n), np.exp(_poly(_C4, n))
        z = np.where(big, (y - m_big) / s_big, (y_small - m_small) / s_small)
        p = special.ndtr(-z)
        p = np.where(~big & (y >= gamma), 1e-99, p)
        p3 = np.maximum(6 / np.pi * (np.arcsin(np.sqrt(w)) - np.pi / 3), 0.0)
        p = np.where(n == 3, p3, p)
    return np.where(n >= 3, p, np.nan)


def shapiro_wilk(e: np.ndarray, n: np.ndarray, padded: bool) -> tuple[np.ndarray, np.ndarray]:
    """Shapiro-Wilk ``(W, p)`` per row; NaN outside 3..5000 points or for constant residuals."""
    G, L = e.shape
    ni = n.astype(int)
    srt = np.sort(np.where(_mask(ni, L), e, np.inf) if padded else e, axis=1)
    if padded:
        srt[~np.isfinite(srt)] = 0.0
    lengths = np.unique(ni)
    if lengths.size == 1:
        coef = np.zeros(L)
        if lengths[0] >= 3:
            coef[:lengths[0]] = shapiro_weights(int(lengths[0]))
        num = srt @ coef
    else:
        table = np.zeros((lengths.size, L))
        for i, k in enumerate(lengths):
            if k >= 3:
                table[i, :k] = shapiro_weights(int(k))
        coef = table[np.searchsorted(lengths, ni)]
        num = np.einsum("gn,gn->g", srt, coef)
    mean = e.sum(axis=1) / n            # padded entries are 0
    ss = np.einsum("gn,gn->g", e, e) - n * mean * mean   # sum of squared deviations
    with np.errstate(all="ignore"):
        w = np.minimum(num * num / ss, 1.0)
    ok = (n >= 3) & (n <= SHAPIRO_MAX_N)
    return np.where(ok, w, np.nan), np.where(ok, _shapiro_p(w, n), np.nan)


def durbin_watson(e: np.ndarray, n: np.ndarray, padded: bool) -> np.ndarray:
    """Durbin-Watson statistic per row, in the given order (padded entries are 0).

    ``sum (e_i - e_{i-1})^2 = 2 sum e_i^2 - e_first^2 - e_last^2 - 2 sum e_i e_{i-1}``:
    no difference array is formed.
    """
    ss = np.einsum("gn,gn->g", e, e)
    lag = np.einsum("gn,gn->g", e[:, 1:], e[:, :-1])
    last = e[np.arange(e.shape[0]), n.astype(np.int64) - 1] if padded else e[:, -1]
    with np.errstate(all="ignore"):
        return (2 * ss - e[:, 0] ** 2 - last ** 2 - 2 * lag) / ss


def breusch_pagan(e2: np.ndarray, n: np.ndarray, q: np.ndarray, degree: np.ndarray,
                  padded: bool) -> tuple[np.ndarray, np.ndarray]:
    """Koenker's LM and its chi-squared p-value per row, from the squared residuals ``e2``.

    ``q`` (P, G, L) is an *unweighted* orthonormal basis of the powers of
    ``t`` on each row's real points (constant first, 0 where padded). The
    vectors after the first are orthogonal to the constant, so projecting
    ``e2`` equals projecting its centred version. Rows with degree < 1 or
    ``n <= degree + 1`` get NaN.
    """
    top = int(degree.max()) if degree.size else 0
    top = min(top, q.shape[0] - 1)
    proj = np.zeros(e2.shape[0])
    if top >= 1:
        h = np.einsum("kgn,gn->gk", q[1:top + 1], e2)
        proj = (h * h * (np.arange(1, top + 1)[None, :] <= degree[:, None])).sum(axis=1)
    total = e2.sum(axis=1)
    ss = np.einsum("gn,gn->g", e2, e2) - total * total / n
    close = np.flatnonzero(~(ss > 1e-8 * np.einsum("gn,gn->g", e2, e2)))
    if close.size:   # nearly constant squared residuals: centre exactly
        zc = e2[close] - (total[close] / n[close])[:, None]
        if padded:
            zc *= _mask(n[close].astype(int), e2.shape[1])
        ss[close] = np.einsum("gn,gn->g", zc, zc)
    with np.errstate(all="ignore"):
        lm = n * proj / ss
        ok = (degree >= 1) & (n > degree + 1) & (ss > 0)
        p = special.chdtrc(np.maximum(degree, 1), lm)
    return np.where(ok, lm, np.nan), np.where(ok, p, np.nan)


def _mask(n: np.ndarray, width: int) -> np.ndarray:
    return np.arange(width)[None, :] < n[:, None]
