"""The polynomial basis: x scaling, design columns, and conversion back to raw powers.

The fit uses ``t = (u - x_shift) / x_scale`` where ``u`` is x after its
transform. With an intercept the data range of ``u`` maps onto [-1, 1];
without one ``x_shift`` is 0 (a shift would smuggle in a constant) and
``x_scale = max |u|`` so ``t`` lies in [-1, 1]. Columns are powers of ``t``:
``t^0..t^d`` with intercept, ``t^1..t^d`` without.
"""

from __future__ import annotations

from functools import lru_cache
from math import comb

import numpy as np

EXTENDED = np.longdouble


def powers(degree: int, intercept: bool) -> np.ndarray:
    """Exponents of the model's columns in entry order."""
    return np.arange(0 if intercept else 1, degree + 1)


@lru_cache(maxsize=64)
def term_names(degree: int, intercept: bool) -> tuple[str, ...]:
    """``("intercept", "x", "x^2", ...)``: names of the coefficients in entry order."""
    return tuple("intercept" if k == 0 else "x" if k == 1 else f"x^{k}"
                 for k in range(0 if intercept else 1, degree + 1))


def scaling(u: np.ndarray, intercept: bool,
            bounds: tuple[float, float] | None = None) -> tuple[float, float]:
    """Return ``(x_shift, x_scale)`` (float64) for the transformed x values ``u``.

    ``bounds`` is ``(u.min(), u.max())`` when the caller already has it.
    """
    lo, hi = (float(u.min()), float(u.max())) if bounds is None else bounds
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


def basis_columns(t: np.ndarray, degree: int, intercept: bool) -> np.ndarray:
    """:func:`basis` (same products as ``np.vander``) built column by column (faster, n x p)."""
    first = 0 if intercept else 1
    cols = np.empty((t.size, degree + 1 - first), dtype=t.dtype)
    if first == 0:
        cols[:, 0] = 1
    elif degree >= 1:
        cols[:, 0] = t
    for k in range(1, degree + 1 - first):
        np.multiply(cols[:, k - 1], t, out=cols[:, k])
    return cols


def basis_rows(t: np.ndarray, degree: int, intercept: bool,
               sqrt_w: np.ndarray | None = None, out: np.ndarray | None = None) -> np.ndarray:
    """Design transposed (p x n): row k is the k-th column, times ``sqrt_w`` if given.

    ``out`` (p x n, dtype of ``t``) receives the rows when given.
    """
    first = 0 if intercept else 1
    rows = np.empty((degree + 1 - first, t.size), dtype=t.dtype) if out is None else out
    # each power is written straight into its row (no temporaries: long series page-fault
    # on every fresh array); the products are the same as cur = cur * t
    if first == 0:
        prev = rows[0]
        if sqrt_w is None:
            prev.fill(1)
        else:
            prev[...] = sqrt_w
    elif degree >= 1:
        prev = rows[0]
        if sqrt_w is None:
            prev[...] = t
        else:
            np.multiply(np.asarray(sqrt_w, dtype=t.dtype), t, out=prev)
    for k in range(1, degree + 1 - first):
        np.multiply(rows[k - 1], t, out=rows[k])
    return rows


def to_t(u: np.ndarray, shift: float, scale: float, dtype=float) -> np.ndarray:
    """``(u - shift) / scale`` computed in ``dtype``."""
    u = np.asarray(u, dtype=dtype)
    t = u - dtype(shift)
    t /= dtype(scale)
    return t


@lru_cache(maxsize=64)
def conversion(shift: float, scale: float, degree: int, intercept: bool,
               inverse: bool = False) -> np.ndarray:
    """Matrix ``T`` (extended precision, read-only) with ``raw = T @ basis`` coefficients.

    ``t^k = ((u - s)/c)^k = sum_j C(k, j) (-s)^(k-j) c^-k u^j``, so
    ``T[j, k] = C(k, j) (-s)^(k-j) / c^k`` for ``j <= k``. Entries are formed
    in longdouble from the exact float64 ``s`` and ``c``; the conversion
    cancels heavily on narrow, off-centre x ranges, which is why the basis
    coefficients must carry extra digits into it. ``inverse=True`` gives
    ``T^-1`` (``u^j = (s + c t)^j``): ``T^-1[k, j] = C(j, k) s^(j-k) c^k``.
    """
    s, c = EXTENDED(shift), EXTENDED(scale)
    a, b = (s, c) if inverse else (-s, EXTENDED(1) / c)
    binom, gap, upper = _pattern(degree)
    apow = np.cumprod(np.concatenate(([EXTENDED(1)], np.full(degree, a, dtype=EXTENDED))))
    bpow = np.cumprod(np.concatenate(([EXTENDED(1)], np.full(degree, b, dtype=EXTENDED))))
    # forward: column k scaled by c^-k; inverse: row j scaled by c^j
    scale_by = bpow[:, None] if inverse else bpow[None, :]
    t = binom * np.where(upper, apow[gap], 0) * scale_by
    t = t if intercept else t[1:, 1:]
    t.setflags(write=False)
    return t


@lru_cache(maxsize=16)
def _pattern(degree: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Binomials ``C(k, j)``, exponent gaps ``k - j`` and the upper-triangle mask."""
    k = np.arange(degree + 1)
    gap = k[None, :] - k[:, None]
    upper = gap >= 0
    binom = np.array([[comb(int(kk), int(j)) if kk >= j else 0 for kk in k] for j in k],
                     dtype=EXTENDED)
    return binom, np.where(upper, gap, 0), upper


@lru_cache(maxsize=64)
def conversion_float(shift: float, scale: float, degree: int, intercept: bool
                     ) -> np.ndarray | None:
    """:func:`conversion` rounded to float64 (read-only), or None when an entry is not
    finite or a diagonal entry is zero ((x range)**degree leaves the double range)."""
    tm = conversion(shift, scale, degree, intercept).astype(float)
    if not np.isfinite(tm).all() or not np.all(np.diag(tm) != 0):
        return None
    tm.setflags(write=False)
    return tm


def raw_coefficients(shift: float, scale: float, degree: int, intercept: bool,
                     coef_basis: np.ndarray, cov_basis: np.ndarray
                     ) -> tuple[np.ndarray, np.ndarray, bool]:
    """Coefficients and covariance on powers of ``u`` (extended precision in, float64 out).

    ``raw = T b`` and ``cov = T C T'``, formed together as ``T [b, C T']``.
    Returns ``(raw, cov, lost)``: entries whose magnitude does not fit a
    normal float64 (over- or underflow when (range of u)**degree leaves the
    double range) are NaN, and ``lost`` says whether that happened.
    """
    tm = conversion(shift, scale, degree, intercept)
    both, lost = _to_double(tm @ np.concatenate((coef_basis[:, None], cov_basis @ tm.T), axis=1))
    return both[:, 0].copy(), both[:, 1:].copy(), lost


_DOUBLE_MAX = float(np.finfo(float).max)
_DOUBLE_TINY = float(np.finfo(float).tiny)


def _to_double(values: np.ndarray) -> tuple[np.ndarray, bool]:
    mag = np.abs(values)
    if mag.max() <= _DOUBLE_MAX and mag.min() >= _DOUBLE_TINY:  # the usual case: all normal
        return values.astype(float), False
    bad = (mag > _DOUBLE_MAX) | ((mag < _DOUBLE_TINY) & (mag != 0))
    out = values.astype(float)
    if bad.any():
        out[bad] = np.nan
        return out, True
    return out, False
