"""Reading a plate of observed y back through one nonlinear curve, all readings at once.

The same method and the same answers as the per-reading search of
:class:`service.core.models.curve_inverse._CurveReader` (see that module), organised
by stage instead of by reading: for a block of :data:`CHUNK` readings the sign changes
of ``f - y0`` and of the band test ``h`` are located on the grid for every reading in
one array operation, and every bracket of the block is refined together by
:func:`~service.core.models.brent_batch.brent_many` (Brent's method, the same steps and
tolerances as the scalar search, one function call per round for the whole block).

Readings the grid does not settle alone go to the scalar search, unchanged: no root or
several roots in the range (the ladder beyond the range, ``outside_range`` /
``no_real_root`` / ``multiple_roots_in_range``), and any bracket on which the batched
search met a NaN or did not converge. An interval end with no sign change of ``h`` on
the grid is looked for on the ladder beyond the range by the scalar
:meth:`~service.core.models.curve_inverse._CurveReader.limit_beyond`.
"""

from __future__ import annotations

import math

import numpy as np

from service.core.models.brent_batch import brent_many
from service.core.models.inverse import InverseEstimate

CHUNK = 256  # readings per block: a few (CHUNK x grid) arrays of doubles, ~8 MB each


def read_all(reader, y: np.ndarray, m: np.ndarray) -> tuple[InverseEstimate, ...]:
    """Every reading read back (estimate, interval, status) as the scalar reader does.

    Parameters
    ----------
    reader : _CurveReader
        The curve's grid, band cache and scalar search.
    y : ndarray
        Finite readings.
    m : ndarray of int
        Replicate count of each reading.

    Returns
    -------
    tuple of InverseEstimate
        One per reading, in order.
    """
    out: list[InverseEstimate] = []
    for start in range(0, len(y), CHUNK):
        out.extend(_read_block(reader, y[start:start + CHUNK], m[start:start + CHUNK]))
    return tuple(out)


def _read_block(reader, y: np.ndarray, m: np.ndarray) -> list[InverseEstimate]:
    x_hat, settled = _estimates(reader, y)
    answers: list[InverseEstimate | None] = [None] * len(y)
    for j in np.flatnonzero(~settled):
        answers[j] = reader.read(float(y[j]), int(m[j]))
    rows = np.flatnonzero(settled)
    if rows.size:
        lower, upper, status, fallback = _intervals(reader, x_hat[rows], y[rows], m[rows])
        for k, j in enumerate(rows):
            if fallback[k]:
                answers[j] = reader.read(float(y[j]), int(m[j]))
                continue
            final = status[k] if reader.monotone else "not_monotone"
            answers[j] = InverseEstimate(float(y[j]), int(m[j]), float(x_hat[j]),
                                         float(lower[k]), float(upper[k]), final, ())
    return answers


def _estimates(reader, y: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """The single root in the range of each reading; ``settled`` False where there is not
    exactly one (or its search failed): those readings take the scalar path."""
    grid = reader.grid
    gap = reader.values[None, :] - y[:, None]
    zero = gap == 0.0
    change = np.sign(gap[:, :-1]) * np.sign(gap[:, 1:]) < 0
    n_zero, n_change = zero.sum(axis=1), change.sum(axis=1)
    x_hat = np.full(y.size, math.nan)
    on_grid = (n_zero == 1) & (n_change == 0)
    x_hat[on_grid] = grid[np.argmax(zero[on_grid], axis=1)]
    crossing = np.flatnonzero((n_zero == 0) & (n_change == 1))
    settled = on_grid.copy()
    if crossing.size:
        i = np.argmax(change[crossing], axis=1)
        roots, resolved = brent_many(lambda x, r: reader.f(x) - y[crossing[r]],
                                     grid[i], grid[i + 1])
        x_hat[crossing] = roots
        settled[crossing] = resolved
    return x_hat, settled


def _intervals(reader, x_hat, y, m):
    """Interval limits and band status of each estimate; ``fallback`` where a batched
    search failed (the reading is redone by the scalar path)."""
    count, grid = y.size, reader.grid
    lower, upper = np.full(count, math.nan), np.full(count, math.nan)
    status = np.full(count, "interval_undefined", dtype=object)
    fallback = np.zeros(count, dtype=bool)
    counts, which = np.unique(m, return_inverse=True)
    bands = [reader._band(int(k)) for k in counts]
    defined = np.array([bool(np.all(np.isfinite(lo)) and np.all(np.isfinite(up)))
                        for lo, up in bands])[which]
    rows = np.flatnonzero(defined)
    if rows.size == 0:
        return lower, upper, status, fallback
    band_lo = np.stack([band[0] for band in bands])[which[rows]]
    band_up = np.stack([band[1] for band in bands])[which[rows]]
    y0, mm, xh = y[rows, None], m[rows], x_hat[rows]
    h = np.maximum(band_lo - y0, y0 - band_up)
    limits, beyond = _grid_limits(reader, h, xh, y[rows], mm)
    failed = np.zeros(rows.size, dtype=bool)
    for side in (0, 1):
        failed |= ~limits[side][1]
    lo_x, hi_x = limits[0][0], limits[1][0]
    for k in np.flatnonzero(beyond[0] & ~failed):
        found = reader.limit_beyond(-1, float(y[rows[k]]), int(mm[k]))
        lo_x[k] = math.nan if found is None else found
    for k in np.flatnonzero(beyond[1] & ~failed):
        found = reader.limit_beyond(+1, float(y[rows[k]]), int(mm[k]))
        hi_x[k] = math.nan if found is None else found
    with np.errstate(invalid="ignore"):
        elsewhere = (grid[None, :] < lo_x[:, None]) | (grid[None, :] > hi_x[:, None])
        disjoint = np.any(elsewhere & (h <= 0), axis=1)
        exceeds = (lo_x < reader.lo) | (hi_x > reader.hi)
    unbounded = np.isnan(lo_x) | np.isnan(hi_x)
    block = np.where(unbounded, "interval_unbounded", np.where(
        exceeds, "interval_exceeds_range", np.where(disjoint, "interval_disjoint", "ok")))
    lower[rows], upper[rows], status[rows], fallback[rows] = lo_x, hi_x, block, failed
    return lower, upper, status, fallback


def _grid_limits(reader, h, x_hat, y, m):
    """Each side's first grid point moving away from the estimate where the band leaves
    y0 (``h > 0``), refined by the batched Brent search between it and the point before
    (the estimate when it is the nearest). Returns ``((limit, resolved), ...)`` per side
    and, per side, where no such grid point exists (the ladder beyond the range decides)."""
    grid, size = reader.grid, reader.grid.size
    positive = h > 0
    left_of = grid[None, :] < x_hat[:, None]
    right_of = grid[None, :] > x_hat[:, None]
    left = positive & left_of
    right = positive & right_of
    has_left, has_right = left.any(axis=1), right.any(axis=1)
    j_left = size - 1 - np.argmax(left[:, ::-1], axis=1)
    j_right = np.argmax(right, axis=1)
    nearest_left = left_of.sum(axis=1) - 1
    nearest_right = size - right_of.sum(axis=1)
    near_left = np.where(j_left == nearest_left, x_hat, grid[np.minimum(j_left + 1, size - 1)])
    near_right = np.where(j_right == nearest_right, x_hat, grid[np.maximum(j_right - 1, 0)])
    a = np.concatenate([grid[j_left][has_left], near_right[has_right]])
    b = np.concatenate([near_left[has_left], grid[j_right][has_right]])
    owners = np.concatenate([np.flatnonzero(has_left), np.flatnonzero(has_right)])
    roots, resolved = brent_many(
        lambda x, r: reader.outside_band(x, y[owners[r]], m[owners[r]]), a, b)
    split = int(has_left.sum())
    sides = []
    for side, has in ((slice(0, split), has_left), (slice(split, None), has_right)):
        limit = np.full(y.size, math.nan)
        ok = np.ones(y.size, dtype=bool)
        limit[has], ok[has] = roots[side], resolved[side]
        sides.append((limit, ok))
    return sides, (~has_left, ~has_right)
