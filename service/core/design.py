"""The polynomial basis: x scaling, design columns, and conversion back to raw powers.

The fit uses ``t = (u - x_shift) / x_scale`` where ``u`` is x after its
transform. With an intercept the data range of ``u`` maps onto [-1, 1];
without one ``x_shift`` is 0 (a shift would smuggle in a constant) and
``x_scale = max |u|`` so ``t`` lies in [-1, 1]. Columns are powers of ``t``:
``t^0..t^d`` with intercept, ``t^1..t^d`` without.
"""

from __future__ import annotations

from math import comb

import numpy as np

EXTENDED = np.longdouble


def powers(degree: int, intercept: bool) -> np.ndarray:
    """Exponents of the model's columns in entry order."""
    return np.arange(0 if intercept else 1, degree + 1)


def term_names(degree: int, intercept: bool) -> tuple[str, ...]:
    """``("intercept", "x", "x^2", ...)``: names of the coefficients in entry order."""
    return tuple("intercept" if k == 0 else "x" if k == 1 else f"x^{k}"
                 for k in powers(degree, intercept))


def scaling(u: np.ndarray, intercept: bool) -> tuple[float, float]:
    """Return ``(x_shift, x_scale)`` (float64) for the transformed x values ``u``."""
    lo, hi = float(u.min()), float(u.max())
    if intercept:
        shift = 0.5 * lo + 0.5 * hi
        scale = 0.5 * hi - 0.5 * lo
    else:
        shift, scale = 0.0, max(abs(lo), abs(hi))
    if not scale > 0:
        scale = 1.0
    return shift, scale


def basis(t: np.ndarray, degree: int, intercept: bool) -> np.ndarray:
    """Design columns: powers of ``t`` in entry order, in the dtype of ``t`` (n x p)."""
    cols = np.vander(t, degree + 1, increasing=True)
    return cols if intercept else cols[:, 1:]


def to_t(u: np.ndarray, shift: float, scale: float, dtype=float) -> np.ndarray:
    """``(u - shift) / scale`` computed in ``dtype``."""
    u = np.asarray(u, dtype=dtype)
    return (u - dtype(shift)) / dtype(scale)


def conversion(shift: float, scale: float, degree: int, intercept: bool) -> np.ndarray:
    """Matrix ``T`` (extended precision) with ``raw = T @ basis`` coefficients.

    ``t^k = ((u - s)/c)^k = sum_j C(k, j) (-s)^(k-j) c^-k u^j``, so
    ``T[j, k] = C(k, j) (-s)^(k-j) / c^k`` for ``j <= k``. Entries are formed
    in longdouble from the exact float64 ``s`` and ``c``; the conversion
    cancels heavily on narrow, off-centre x ranges, which is why the basis
    coefficients must carry extra digits into it.
    """
    s, c = EXTENDED(shift), EXTENDED(scale)
    d = degree
    t = np.zeros((d + 1, d + 1), dtype=EXTENDED)
    inv_c = EXTENDED(1) / c
    for k in range(d + 1):
        ck = inv_c ** k
        for j in range(k + 1):
            t[j, k] = EXTENDED(comb(k, j)) * (-s) ** (k - j) * ck
    if not intercept:
        t = t[1:, 1:]
    return t


def raw_coefficients(shift: float, scale: float, degree: int, intercept: bool,
                     coef_basis: np.ndarray, cov_basis: np.ndarray
                     ) -> tuple[np.ndarray, np.ndarray]:
    """Coefficients and covariance on powers of ``u`` (extended precision in, float64 out)."""
    tm = conversion(shift, scale, degree, intercept)
    raw = tm @ np.asarray(coef_basis, dtype=EXTENDED)
    cov = tm @ np.asarray(cov_basis, dtype=EXTENDED) @ tm.T
    return raw.astype(float), cov.astype(float)
