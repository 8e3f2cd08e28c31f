"""Compiled evaluation of a fitted curve and its three bands at many points.

One loop over the points forms, on the fitting scale, the fitted value
``v(t)'b``, its standard error ``sigma ||R^-T v(t)||`` and the half-widths
of the mean, new-observation and simultaneous bands (formulas in
:mod:`service.core.bands`).
"""

from __future__ import annotations

import numba
import numpy as np


@numba.njit(cache=True, nogil=True, error_model="numpy")
def curve_bands(t, first, coef, r_inv, sigma, tq, wh, m):
    """Rows: fit, se, mean lower/upper, observation lower/upper, band lower/upper (8 x k).

    Parameters
    ----------
    t : ndarray
        Scaled x of the points.
    first : int
        Exponent of the first column (0 with an intercept, else 1).
    coef, r_inv : ndarray
        Basis coefficients (p,) and ``R^-1`` (p x p).
    sigma, tq, wh : float
        Residual SD, t critical value and Working-Hotelling factor.
    m : int
        Number of future observations averaged by the observation band.
    """
    k, p = t.size, coef.size
    out = np.empty((8, k))
    v = np.empty(p)
    extra = sigma * sigma / m
    for i in range(k):
        ti = t[i]
        v[0] = ti if first else 1.0
        for j in range(1, p):
            v[j] = v[j - 1] * ti
        fit = 0.0
        ss = 0.0
        for j in range(p):
            fit += v[j] * coef[j]
            s = 0.0
            for a in range(j + 1):
                s += v[a] * r_inv[a, j]
            ss += s * s
        se = sigma * np.sqrt(ss)
        half = (se * tq, np.sqrt(se * se + extra) * tq, se * wh)
        out[0, i] = fit
        out[1, i] = se
        for b in range(3):
            out[2 + 2 * b, i] = fit - half[b]
            out[3 + 2 * b, i] = fit + half[b]
    return out
