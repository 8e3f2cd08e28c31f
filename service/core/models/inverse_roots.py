"""Real roots of the fitted polynomial in the scaled basis t, for inverse reading.

Companion-matrix eigenvalues (all readings in one call) with a Newton polish;
an eigenvalue counts as real when ``|imag| / (1 + |root|)`` is below
:data:`REAL_TOL`.
"""

from __future__ import annotations

import numpy as np
from numpy.polynomial import polynomial as P

REAL_TOL = 1e-7  # |imag| / (1 + |root|) below which a companion eigenvalue is real


def batch_roots(coef: np.ndarray, y_t: np.ndarray) -> list[list[float] | None]:
    """Real roots of f(t) - y for every y (companion matrices, eigenvalues in one call).

    None for a y whose companion matrix overflows (far beyond the curve's scale).
    """
    coef = np.trim_zeros(np.asarray(coef, dtype=float), "b")
    d = len(coef) - 1
    if d < 1:
        return [[] for _ in y_t]
    rows = np.tile(coef, (len(y_t), 1))
    rows[:, 0] -= y_t
    monic = rows[:, :-1] / coef[-1]
    companion = np.zeros((len(y_t), d, d))
    companion[:, 1:, :-1] = np.eye(d - 1)
    companion[:, :, -1] = -monic
    usable = np.all(np.isfinite(companion), axis=(1, 2))
    values = np.full((len(y_t), d), np.nan, dtype=complex)
    if usable.any():
        values[usable] = np.linalg.eigvals(companion[usable])
    real = np.abs(values.imag) <= REAL_TOL * (1.0 + np.abs(values.real))
    t = values.real.copy()
    slope = P.polyder(coef)
    with np.errstate(all="ignore"):
        for _ in range(2):  # Newton polish of every candidate at once
            d_t = P.polyval(t, slope)
            step = np.where(d_t != 0, (P.polyval(t, coef) - y_t[:, None]) / d_t, 0.0)
            t = np.where(np.isfinite(step), t - step, t)
    return [sorted(float(v) for v in t[i][real[i] & np.isfinite(t[i])]) if usable[i] else None
            for i in range(len(y_t))]


def real_roots(coef: np.ndarray) -> list[float]:
    """Real roots of a polynomial given on t^0..t^d (trailing zeros trimmed)."""
    coef = np.trim_zeros(np.asarray(coef, dtype=float), "b")
    if len(coef) < 2 or not np.all(np.isfinite(coef)):
        return []
    roots = P.polyroots(coef)
    keep = np.abs(roots.imag) <= REAL_TOL * (1.0 + np.abs(roots.real))
    return [float(r) for r in roots.real[keep]]


def changes_sign(coef: np.ndarray, t: float) -> bool:
    """Whether the polynomial changes sign across t (tested 1e-6 (1 + |t|) either side)."""
    step = 1e-6 * (1.0 + abs(t))
    return P.polyval(t - step, coef) * P.polyval(t + step, coef) < 0
