"""Compiled float64 read-out of a chosen fit: basis and raw-power coefficients, covariance,
condition numbers and the precision check, in one call.

The fit (``polynomial.py``) asks :func:`float64_readout` first. It returns
``ok = False`` when the estimated relative error of a float64 factorization
(:func:`service.core.polynomial.compiled.qr.float64_loss`) exceeds ``tol``; the fit then
repeats in extended precision and converts to raw powers in longdouble
(``design.raw_coefficients``). When ``ok`` the conversion ``raw = T b``,
``cov = T C T' sigma²`` (``C = R^-1 R^-T``) runs in float64: its own rounding,
at most ``p eps`` times the cancellation ``(|T| |b|)_j / |(T b)_j|`` per entry,
is part of that estimate (``float64_loss`` multiplies the same cancellation by
``||R||_F ||R^-1||_F >= p``), so it stays within ``tol`` too.
"""

from __future__ import annotations

import numba
import numpy as np

from service.core.polynomial.compiled.qr import conditions, float64_loss

_DOUBLE_MAX = np.finfo(np.float64).max
_DOUBLE_TINY = np.finfo(np.float64).tiny


@numba.njit(cache=True, nogil=True, error_model="numpy")
def float64_readout(r, r_inv, effects, p, tm, sigma2, tol):
    """Everything the fit reports from the leading ``p`` columns of a float64 QR.

    Parameters
    ----------
    r, r_inv : (P, P) float64 R factor of the largest candidate and its inverse.
    effects : (P,) float64 ``Q'zw``.
    p : number of coefficients of the chosen candidate (its block is leading).
    tm : (p, p) float64 conversion to raw powers (``design.conversion_float``).
    sigma2 : residual mean square of the chosen fit (0 for an exact fit).
    tol : largest acceptable estimated relative error.

    Returns
    -------
    ok : bool
        The float64 numbers are within ``tol`` (estimated); when False the
        arrays below are unset except ``r64``, ``coef`` and the conditions.
    coef, r64, raw, cov : the basis coefficients, ``R[:p, :p]``, the raw-power
        coefficients and their covariance (entries outside the normal double
        range are NaN).
    lost : bool
        Some raw entry was outside the normal double range.
    basis_cond, raw_cond : condition numbers (``kernels_qr.conditions``).
    """
    r64 = np.ascontiguousarray(r[:p, :p])
    ri = np.ascontiguousarray(r_inv[:p, :p])
    coef = np.zeros(p)
    for i in range(p):
        acc = 0.0
        for j in range(i, p):
            acc += ri[i, j] * effects[j]
        coef[i] = acc
    basis_cond, raw_cond = conditions(r64, tm)
    raw = np.empty(p)
    cov = np.empty((p, p))
    if not float64_loss(r64, ri, coef, tm) <= tol:
        return False, coef, r64, raw, cov, False, basis_cond, raw_cond
    tr = np.zeros((p, p))  # T R^-1 (both upper triangular)
    for i in range(p):
        acc = 0.0
        for k in range(i, p):
            acc += tm[i, k] * coef[k]
            s = 0.0
            for m in range(i, k + 1):
                s += tm[i, m] * ri[m, k]
            tr[i, k] = s
        raw[i] = acc
    for i in range(p):
        for j in range(i, p):
            acc = 0.0
            for k in range(j, p):
                acc += tr[i, k] * tr[j, k]
            cov[i, j] = acc * sigma2
            cov[j, i] = cov[i, j]
    lost = False
    for i in range(p):
        raw[i], bad = _normal_or_nan(raw[i])
        lost = lost or bad
        for j in range(p):
            cov[i, j], bad = _normal_or_nan(cov[i, j])
            lost = lost or bad
    return True, coef, r64, raw, cov, lost, basis_cond, raw_cond


@numba.njit(cache=True, nogil=True, error_model="numpy")
def _normal_or_nan(v):
    """``(v, False)`` for zero or a normal double, ``(nan, True)`` otherwise
    (the rule of ``design.raw_coefficients``)."""
    mag = abs(v)
    if mag == 0.0 or _DOUBLE_TINY <= mag <= _DOUBLE_MAX:
        return v, False
    return np.nan, True
