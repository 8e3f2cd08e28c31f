"""Compiled evaluation of a fitted curve and its three bands at many points.

One loop over the points forms, on the fitting scale, the fitted value
``v(t)'b``, its standard error ``sigma ||R^-T v(t)||`` and the half-widths
of the mean, new-observation and simultaneous bands (formulas in
:mod:`service.core.polynomial.bands`).
"""

from __future__ import annotations

import numba
import numpy as np


@numba.njit(cache=True, nogil=True, error_model="numpy")
def curve_bands(x, u, shift, scale, first, coef, r_inv, sigma, tq, wh, m, lo, hi):
    """Fit, se and the band limits at ``u``, which points extrapolate, and whether all is finite.

    Parameters
    ----------
    x, u : ndarray
        x of the points, and after the x transform; ``t = (u - shift) / scale``.
    shift, scale : float
        The fit's x scaling.
    first : int
        Exponent of the first column (0 with an intercept, else 1).
    coef, r_inv : ndarray
        Basis coefficients (p,) and ``R^-1`` (p x p).
    sigma, tq, wh : float
        Residual SD, t critical value and Working-Hotelling factor.
    m : int
        Number of future observations averaged by the observation band.
    lo, hi : float
        The fitted data range of ``x``; points outside it extrapolate.

    Returns
    -------
    rows : ndarray (8, k)
        fit, se, mean lower/upper, observation lower/upper, band lower/upper.
    outside : ndarray of bool (k,)
        ``x < lo`` or ``x > hi``.
    finite : bool
        True when every limit is finite.
    """
    k, p = u.size, coef.size
    out = np.empty((8, k))
    outside = np.empty(k, dtype=np.bool_)
    v = np.empty(p)
    extra = sigma * sigma / m
    finite = True
    for i in range(k):
        outside[i] = x[i] < lo or x[i] > hi
        ti = (u[i] - shift) / scale
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
            finite = finite and np.isfinite(out[2 + 2 * b, i]) and np.isfinite(out[3 + 2 * b, i])
    return out, outside, finite
