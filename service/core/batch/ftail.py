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
The continued fraction is the one the shared checks use for every incomplete beta
(:func:`service.core.checks.kernels.beta_fraction`).
"""

from __future__ import annotations

import math

import numba
import numpy as np
from scipy import special

from service.core.checks.kernels import beta_fraction


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
        return front * beta_fraction(a, 0.5, x) / a
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
