"""The first sign change along a ladder of points beyond the range, for many readings.

The batched form of :func:`service.core.models.curve_reader._first_crossing`, with its
rules: walking outward from ``start`` along ``ladder``, points where the function is
not finite are skipped; the first point where it is zero is the answer; otherwise the
first point whose sign (``> 0`` or not) differs from the last finite point before it
brackets a root, refined by :func:`~service.core.models.brent_batch.brent_many`. A
reading whose function is not finite at ``start``, or which never changes sign along
the ladder, has none (NaN here, None there).
"""

from __future__ import annotations

import numpy as np

from service.core.models.brent_batch import BatchFunction, brent_many


def first_crossings(start: float, ladder: np.ndarray, fn: BatchFunction, count: int
                    ) -> tuple[np.ndarray, np.ndarray]:
    """The first crossing along ``ladder`` of each of ``count`` functions.

    Parameters
    ----------
    start : float
        Where the walk starts (an end of the range).
    ladder : ndarray
        Points beyond it, outward.
    fn : callable
        ``fn(x, rows)``: function ``rows[j]`` at ``x[j]``.
    count : int
        How many functions (readings), numbered ``0 .. count - 1``.

    Returns
    -------
    crossing : ndarray
        The crossing of each function, NaN where there is none.
    resolved : ndarray of bool
        False where the refining search met a NaN or did not converge.
    """
    rows = np.arange(count)
    ladder = np.asarray(ladder, dtype=float)
    crossing = np.full(count, np.nan)
    resolved = np.ones(count, dtype=bool)
    if count == 0 or ladder.size == 0:  # nothing to walk (a curve's domain ends there)
        return crossing, resolved
    first = np.asarray(fn(np.full(count, float(start)), rows), dtype=float)
    walks = np.flatnonzero(np.isfinite(first))
    if walks.size == 0:
        return crossing, resolved
    size = ladder.size
    values = np.asarray(fn(np.tile(ladder, walks.size), np.repeat(walks, size)),
                        dtype=float).reshape(walks.size, size)
    finite = np.isfinite(values)
    points = np.concatenate([[float(start)], ladder])
    # the index (into points) of the last finite point at or before each point
    index = np.where(np.concatenate([np.ones((walks.size, 1), bool), finite], axis=1),
                     np.arange(size + 1), 0)
    last = np.maximum.accumulate(index, axis=1)
    positive = np.concatenate([first[walks, None] > 0, values > 0], axis=1)
    sign_now = np.take_along_axis(positive, last, axis=1)
    flips = finite & ((values == 0.0) | (sign_now[:, 1:] != sign_now[:, :-1]))
    found = flips.any(axis=1)
    k = np.argmax(flips, axis=1)
    at = walks[found]
    k_found = k[found]
    zero = values[found, k_found] == 0.0
    crossing[at[zero]] = ladder[k_found[zero]]
    refine = ~zero
    before = points[last[found, k_found][refine]]
    beyond = ladder[k_found[refine]]
    owners = at[refine]
    roots, ok = brent_many(lambda x, r: fn(x, owners[r]), np.minimum(before, beyond),
                           np.maximum(before, beyond))
    crossing[owners], resolved[owners] = roots, ok
    return crossing, resolved
