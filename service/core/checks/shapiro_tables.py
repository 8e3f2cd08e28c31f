"""Shapiro-Wilk constants for the batch kernel: AS R94 weights per length, p-value polynomials.

Royston's approximation, algorithm AS R94 (Royston 1995, *Applied Statistics*
44, 547-551) — the algorithm behind ``scipy.stats.shapiro``, whose output the
tests use as the oracle. The kernel (:mod:`service.core.batch.kernel`) forms
``W = (c . e_sorted)^2 / SS`` with these weights; ``checks.kernels.shapiro_p``
turns W into its p-value with the polynomials ``C3`` .. ``C6`` and ``GAMMA``.
"""

from __future__ import annotations

from functools import lru_cache

import numpy as np
from scipy import special

from service.core.checks.shapiro import MAX_N, royston_weights

# AS R94 polynomial coefficients (Royston 1995), lowest power first.
C1 = (0.0, 0.221157, -0.147981, -2.07119, 4.434685, -2.706056)
C2 = (0.0, 0.042981, -0.293762, -1.752461, 5.682633, -3.582633)
C3 = (0.544, -0.39978, 0.025054, -6.714e-4)
C4 = (1.3822, -0.77857, 0.062767, -0.0020322)
C5 = (-1.5861, -0.31082, -0.083751, 0.0038915)
C6 = (-0.4803, -0.082676, 0.0030302)
GAMMA = (-2.273, 0.459)
SHAPIRO_MAX_N = MAX_N  # upper limit of Royston's approximation


def _poly(coefs, x):
    out = np.zeros_like(np.asarray(x, dtype=float)) + coefs[-1]
    for c in coefs[-2::-1]:
        out = out * x + c
    return out


@lru_cache(maxsize=512)
def shapiro_weights(n: int) -> np.ndarray:
    """Antisymmetric AS R94 weights ``c`` (length n): ``W = (c . e_sorted)^2 / SS``."""
    half = n // 2
    a = np.zeros(half)
    ref = royston_weights(n) if n > 3 else None   # scipy's numbers exactly
    if ref is not None:
        a = ref
    elif n == 3:
        a[0] = np.sqrt(0.5)
    else:
        m = special.ndtri((np.arange(1, half + 1) - 0.375) / (n + 0.25))
        summ2 = 2.0 * float(m @ m)
        ssumm2 = np.sqrt(summ2)
        rsn = 1.0 / np.sqrt(n)
        a1 = float(_poly(C1, rsn)) - m[0] / ssumm2
        if n > 5:
            a2 = -m[1] / ssumm2 + float(_poly(C2, rsn))
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
