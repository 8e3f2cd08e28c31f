"""Compiled upper tail of F(1, df) for the batch kernel: p-values of the last power.

``P(F(1, df) > f) = I_x(df/2, 1/2)`` with ``x = df / (df + f)`` (the regularized
incomplete beta function; equivalently the two-sided tail of Student's t at
``sqrt(f)``). Where the tail is small (``x < (a + 1) / (a + b + 2)``, with
``a = df/2``, ``b = 1/2``) it is the continued fraction of Numerical Recipes
(Press et al., 3rd ed., sec. 6.4, modified Lentz) times ``x^a (1-x)^b / (a B(a, b))``;
elsewhere the tail is at least about 0.08 and the finite sums of Abramowitz &
Stegun 26.7.3 (odd df) and 26.7.4 (even df) give it without cancellation.
``tests/batch/test_ftail.py`` checks it against ``scipy.special.fdtrc``
(the single-series path's function) over df 1..6000: 1e-11 relative or better.
"""

from __future__ import annotations

import math

import numba
import numpy as np
from scipy import special

_TINY = 1e-300


@numba.njit(cache=True, nogil=True, error_model="numpy")
def _beta_fraction(a, b, x):
    """Continued fraction of ``I_x(a, b)`` (modified Lentz), converging for small ``x``."""
    qab, qap, qam = a + b, a + 1.0, a - 1.0
    c, d = 1.0, 1.0 - qab * x / qap
    d = 1.0 / (d if abs(d) > _TINY else _TINY)
    h = d
    for m in range(1, 1000):
        m2 = 2 * m
        for aa in (m * (b - m) * x / ((qam + m2) * (a + m2)),
                   -(a + m) * (qab + m) * x / ((a + m2) * (qap + m2))):
            d = 1.0 + aa * d
            d = 1.0 / (d if abs(d) > _TINY else _TINY)
            c = 1.0 + aa / c
            c = c if abs(c) > _TINY else _TINY
            h *= d * c
        if abs(d * c - 1.0) < 2e-16:
            break
    return h


@numba.njit(cache=True, nogil=True, error_model="numpy")
def f1_tail(f, df, log_beta):
    """``P(F(1, df) > f)`` for integer ``df >= 1``; ``log_beta = ln B(df/2, 1/2)``."""
    if not f >= 0.0:
        return np.nan
    if f == 0.0:
        return 1.0
    if f == np.inf:
        return 0.0
    a = 0.5 * df
    x, y = df / (df + f), f / (df + f)            # cos^2 and sin^2 of the t angle
    if x < (a + 1.0) / (a + 2.5):
        front = math.exp(a * math.log(x) + 0.5 * math.log(y) - log_beta)
        return front * _beta_fraction(a, 0.5, x) / a
    k = int(df)
    s = math.sqrt(y)
    if k % 2 == 0:                                  # A&S 26.7.4
        term = total = 1.0
        for j in range(1, k // 2):
            term *= x * (2 * j - 1) / (2 * j)
            total += term
        return 1.0 - s * total
    theta = math.atan2(s, math.sqrt(x))             # A&S 26.7.3
    if k == 1:
        return 1.0 - 2.0 * theta / math.pi
    term = total = math.sqrt(x)
    for j in range(1, (k - 1) // 2):
        term *= x * (2 * j) / (2 * j + 1)
        total += term
    return 1.0 - 2.0 / math.pi * (theta + s * total)


def log_beta_table(size: int) -> np.ndarray:
    """``ln B(df/2, 1/2)`` for df = 0 .. size - 1 (df 0 holds df 1's value)."""
    return special.betaln(0.5 * np.maximum(np.arange(size), 1), 0.5)
