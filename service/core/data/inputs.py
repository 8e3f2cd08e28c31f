"""Checking the caller's arrays and the family-independent options before any numerics.

Every problem becomes a typed error naming the offending field (with the
caller's original index) and saying what to do about it.
"""

from __future__ import annotations

import math
from typing import NamedTuple

import numpy as np

from service.core.data.pair_summary import pair_summary
from service.core.errors import DataError, SpecError, also_at
from service.core.spec import MISSING_POLICIES, SECTIONS, WEIGHTINGS, FitOptions


class CleanData(NamedTuple):
    """Finite, validated arrays of the points used, with their original positions.

    ``x_bounds``/``y_bounds`` (min, max) and ``distinct`` (number of distinct
    x) are filled when nothing was dropped and x is sorted ascending, else None.
    """

    x: np.ndarray
    y: np.ndarray
    w: np.ndarray | None
    index: np.ndarray
    n_input: int
    dropped: tuple[int, ...]
    x_bounds: tuple[float, float] | None = None
    y_bounds: tuple[float, float] | None = None
    distinct: int | None = None


def _as_vector(values, name: str) -> np.ndarray:
    try:
        arr = np.asarray(values, dtype=float)
    except (TypeError, ValueError) as exc:
        raise DataError(f"{name} must be a list of numbers ({exc}).", field=name,
                        fix=f"Send {name} as a flat array of numbers (null marks a missing "
                            "value).") from None
    if arr.ndim != 1:
        raise DataError(f"{name} must be one-dimensional, got shape {arr.shape}.", field=name,
                        fix=f"Send {name} as a flat array of numbers.")
    if not (arr.flags.c_contiguous and arr.flags.writeable):  # one compiled signature for all
        arr = arr.copy()
    return arr


def check_pairs(x: np.ndarray, y: np.ndarray, weights: np.ndarray | None) -> None:
    """Refuse ``y`` (or ``weights``) of another length than ``x``.

    Raises
    ------
    DataError
        Naming ``y`` or ``weights``, with the two lengths.
    """
    n = x.size
    if y.size != n:
        raise DataError(f"x has {n} values but y has {y.size}.", field="y",
                        fix="Send x and y with the same number of values, paired by position.")
    if weights is not None and weights.size != n:
        raise DataError(f"x has {n} values but weights has {weights.size}.", field="weights",
                        fix="Send one weight per point, or no weights at all.")


def clean_data(x, y, weights, missing: str) -> CleanData:
    """Validate lengths, finiteness, weights and the missing-value policy.

    Raises
    ------
    DataError
        Mismatched lengths, empty input, infinite values, missing values under
        ``missing="error"``, or weights that are not strictly positive.
    """
    xa, ya = _as_vector(x, "x"), _as_vector(y, "y")
    wa = None if weights is None else _as_vector(weights, "weights")
    check_pairs(xa, ya, wa)
    n = xa.size
    if n == 0:
        raise DataError("No data points were given.", field="x",
                        fix="Send at least as many points as the model has coefficients.")
    arrays = [("x", xa), ("y", ya)] + ([("weights", wa)] if wa is not None else [])
    finite, x_lo, x_hi, y_lo, y_hi, distinct = pair_summary(xa, ya)
    if finite and (wa is None or math.isfinite(float(np.add.reduce(wa)))):
        if wa is not None:
            if not np.all(wa > 0):
                _bad_weight(wa, np.arange(n), weights)
            check_weight_ratio(wa)
        return CleanData(xa, ya, wa, np.arange(n), n, (), (float(x_lo), float(x_hi)),
                         (float(y_lo), float(y_hi)), distinct if distinct > 0 else None)
    for name, arr in arrays:
        bad = np.isinf(arr)
        if bad.any():
            where = np.flatnonzero(bad)
            i = int(where[0])
            raise DataError(f"{name}[{i}] is infinite.{also_at(where)}", field=f"{name}[{i}]",
                            fix="Replace it with a finite number, or with null to mark it missing.")
    isnan = np.isnan(xa) | np.isnan(ya)
    if wa is not None:
        isnan |= np.isnan(wa)
    index = np.arange(n)
    dropped: tuple[int, ...] = ()
    if isnan.any():
        if missing == "error":
            where = np.flatnonzero(isnan)  # incomplete pairs; x before y before weights
            i = int(where[0])
            name = next(name for name, arr in arrays if np.isnan(arr[i]))
            raise DataError(f"{name}[{i}] is missing (null or NaN).{also_at(where)}",
                            field=f"{name}[{i}]",
                            fix='Supply the value, remove the pair, or set missing = "drop" '
                                "to drop incomplete pairs (their indices are reported).")
        keep = ~isnan
        dropped = tuple(int(i) for i in np.flatnonzero(isnan))
        xa, ya, index = xa[keep], ya[keep], index[keep]
        wa = wa[keep] if wa is not None else None
        if xa.size == 0:
            raise DataError("Every pair has a missing value; nothing is left to fit.", field="x",
                            fix="Send complete (x, y) pairs.")
    if wa is not None:
        if not np.all(wa > 0):
            _bad_weight(wa, index, weights)
        check_weight_ratio(wa)
    return CleanData(xa, ya, wa, index, n, dropped)


def check_weight_ratio(w: np.ndarray) -> None:
    """Refuse positive weights whose largest / smallest ratio exceeds :data:`MAX_WEIGHT_RATIO`.

    Raises
    ------
    DataError
        Naming ``weights`` and the supported ratio.
    """
    ratio = float(w.max()) / float(w.min())
    if not ratio <= MAX_WEIGHT_RATIO:
        raise DataError(
            f"The weights span a ratio of {ratio:.3g} (largest / smallest); this service "
            f"supports at most {MAX_WEIGHT_RATIO:.0e}. Beyond it double precision cannot "
            "resolve the residuals of the lightest points next to the rounding of the "
            "heaviest, and the fit would look exact.", field="weights",
            fix="Drop the points whose weight is negligible, or measure them more precisely; "
                "weights are inverse variances, so a ratio of 1e16 is a 1e8 ratio of standard "
                "deviations.")


def _bad_weight(wa: np.ndarray, index: np.ndarray, weights) -> None:
    where = index[np.flatnonzero(wa <= 0)]
    i = int(where[0])
    raise DataError(f"weights[{i}] = {float(weights[i])!r} is not positive.{also_at(where)}",
                    field=f"weights[{i}]",
                    fix="Weights are inverse variances (1/sd^2) and must be > 0; drop the "
                        "point instead of giving it weight 0.")


# Largest ratio of the largest to the smallest weight. A residual below 8 eps ||sqrt(w) y|| is
# the rounding of y itself (decomposition.EXACT_FIT_RTOL), so the light points' residuals stay
# visible while (r/y)^2 / ratio > 64 eps^2: at 1e16 down to relative residuals of about 2e-7.
# Checked against 60-digit fits in tests/core/test_weight_ratio.py.
MAX_WEIGHT_RATIO = 1e16
TINY_LIMIT = 1e-150  # every |value| below this: squares underflow (sums of squares vanish)


_DOUBLE_MAX = float(np.finfo(float).max)


def magnitude_limit(n: int) -> float:
    """Largest |value| whose squares still sum over ``n`` points within float64 (margin 64)."""
    return math.sqrt(_DOUBLE_MAX / (64.0 * max(n, 1)))  # IEEE sqrt, as np.sqrt


def check_magnitude(values: np.ndarray, field: str, index: np.ndarray, what: str,
                    bounds: tuple[float, float] | None = None) -> tuple[float, float] | None:
    """Refuse values whose squares would overflow or underflow float64 sums of squares.

    Returns ``(min, max)`` of the values (None when empty), for callers that
    need them; ``bounds`` gives them when the caller already has them.

    Raises
    ------
    DataError
        Naming the first offending value, with a fix (change units).
    """
    if values.size == 0:
        return None
    lo, hi = (float(values.min()), float(values.max())) if bounds is None else bounds
    top = max(hi, -lo)
    limit = magnitude_limit(values.size)
    if limit >= top >= TINY_LIMIT:
        return lo, hi
    mags = np.abs(values)
    big = mags > limit
    if big.any():
        positions = np.flatnonzero(big)
        i = int(positions[0])
        where = f" {what}" if what else ""
        raise DataError(f"{field}[{int(index[i])}] = {values[i]:g} is too large in magnitude"
                        f"{where} (limit {limit:.3g} for {values.size} points)."
                        f"{also_at(index[positions])}",
                        field=f"{field}[{int(index[i])}]",
                        fix=f"Rescale {field} (change its units) so its values are moderate.")
    if 0.0 < top < TINY_LIMIT:
        where = f" {what}" if what else ""
        raise DataError(f"Every {field} value is below {TINY_LIMIT:g} in magnitude"
                        f"{where}; sums of squares would underflow.", field=field,
                        fix=f"Rescale {field} (change its units) so its values are moderate.")
    return lo, hi


def check_options(options: FitOptions) -> None:
    """Validate the family-independent options (level, missing policy, sections).

    Raises
    ------
    SpecError
        An unknown name or an out-of-range number, naming the field.
    """
    if not 0.0 < float(options.level) < 1.0:
        raise SpecError(f"level = {options.level!r} is not between 0 and 1.", field="level",
                        fix="Use a confidence level such as 0.95.")
    if options.missing not in MISSING_POLICIES:
        raise SpecError(f"Unknown missing policy {options.missing!r}.", field="missing",
                        fix='Use "error" or "drop".')
    unknown = set(options.include) - set(SECTIONS)
    if unknown:
        raise SpecError(f"Unknown section(s) in include: {sorted(unknown)}.", field="include",
                        fix=f"Use names from {', '.join(SECTIONS)}.")
    if options.weighting not in WEIGHTINGS:
        raise SpecError(f"Unknown weighting {options.weighting!r}.", field="weighting",
                        fix=f"Use one of {', '.join(WEIGHTINGS)}.")
