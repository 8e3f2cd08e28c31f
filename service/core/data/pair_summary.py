"""Compiled one-pass summary of paired input arrays: finiteness, ranges, order, distinct x."""

from __future__ import annotations

import numba
import numpy as np


@numba.njit(cache=True, nogil=True, error_model="numpy")
def pair_summary(x, y):
    """``(finite, x_min, x_max, y_min, y_max, distinct)`` of equal-length, non-empty ``x``, ``y``.

    ``finite`` is False when any value is NaN or infinite (the other numbers
    are then meaningless). ``distinct`` counts the distinct x values when x
    is sorted ascending (ties allowed), and is -1 otherwise.
    """
    finite = True
    x_min = x_max = x[0]
    y_min = y_max = y[0]
    ascending = True
    distinct = 1
    for i in range(x.size):
        xi, yi = x[i], y[i]
        finite = finite and np.isfinite(xi) and np.isfinite(yi)
        x_min = min(x_min, xi)
        x_max = max(x_max, xi)
        y_min = min(y_min, yi)
        y_max = max(y_max, yi)
        if i > 0:
            if xi < x[i - 1]:
                ascending = False
            elif xi != x[i - 1]:
                distinct += 1
    return finite, x_min, x_max, y_min, y_max, distinct if ascending else -1
