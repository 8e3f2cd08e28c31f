"""Reading a plate of observed y back through one nonlinear curve, all readings at once.

The same method and the same answers as the per-reading search of
:class:`service.core.models.curve_reader.CurveReader` (see that module), organised
by stage instead of by reading: for a block of :data:`CHUNK` readings the sign changes
of ``f - y0`` and of the band test ``h`` are located on the grid for every reading in
one array operation, and every bracket of the block is refined together by
:func:`~service.core.models.brent_batch.brent_many` (Brent's method, the same steps and
tolerances as the scalar search, one function call per round for the whole block).

The ladder beyond the range (the nearest root outside it for a reading with none
inside, an interval end with no sign change of ``h`` on the grid) is walked for all
readings together too (:func:`~service.core.models.ladder_batch.first_crossings`).
Only readings with several roots in the range (``multiple_roots_in_range``) and any
reading on which a batched search met a NaN or did not converge go to the scalar
search, unchanged.
"""

from __future__ import annotations

import math

import numpy as np

from service.core.checks.exact_fit import NO_RESIDUAL_VARIANCE, no_residual_variance
from service.core.models.brent_batch import brent_many
from service.core.models.inverse import InverseEstimate
from service.core.models.ladder_batch import first_crossings

CHUNK = 256  # readings per block: a few (CHUNK x grid) tables, 1 MB per boolean table
BATCH_FROM = 2  # fewer readings than this take the scalar search (same answers, less set-up)


def read_all(reader, y: np.ndarray, m: np.ndarray, w: np.ndarray | None = None
             ) -> tuple[InverseEstimate, ...]:
    """Every reading read back (estimate, interval, status) as the scalar reader does.

    Parameters
    ----------
    reader : CurveReader
        The curve's grid, bands, ladder and scalar search
        (:class:`service.core.models.curve_reader.CurveReader`).
    y : ndarray
        Finite readings.
    m : ndarray of int
        Replicate count of each reading.
    w : ndarray, optional
        Weight of each reading (default 1): the bands use ``m w``.

    Returns
    -------
    tuple of InverseEstimate
        One per reading, in order.
    """
    w = np.ones(len(y)) if w is None else w
    if len(y) < BATCH_FROM:  # one reading: the scalar search costs less than the set-up
        return tuple(reader.read(float(v), int(k), float(g))
                     for v, k, g in zip(y, m, w, strict=True))
    out: list[InverseEstimate] = []
    for start in range(0, len(y), CHUNK):
        block = slice(start, start + CHUNK)
        out.extend(_read_block(reader, y[block], m[block], w[block]))
    return tuple(out)


def _read_block(reader, y: np.ndarray, m: np.ndarray, w: np.ndarray) -> list[InverseEstimate]:
    x_hat, settled, unreached = _estimates(reader, y)
    answers: list[InverseEstimate | None] = [None] * len(y)
    beyond, found = _outside_roots(reader, y[unreached])
    for k, j in enumerate(np.flatnonzero(unreached)):
        if found[k]:
            status = "no_real_root" if math.isnan(beyond[k]) else "outside_range"
            others = () if math.isnan(beyond[k]) else (float(beyond[k]),)
            answers[j] = InverseEstimate(float(y[j]), int(m[j]), math.nan, math.nan, math.nan,
                                         status, others)
    rows = np.flatnonzero(settled)
    if rows.size:
        lower, upper, status, fallback = _intervals(reader, x_hat[rows], y[rows],
                                                    m[rows] * w[rows])
        for k, j in enumerate(rows):
            if not fallback[k]:
                final = status[k] if reader.monotone else "not_monotone"
                answers[j] = InverseEstimate(float(y[j]), int(m[j]), float(x_hat[j]),
                                             float(lower[k]), float(upper[k]), final, ())
    for j, answer in enumerate(answers):
        if answer is None:  # several roots in the range, or a batched search failed
            answers[j] = reader.read(float(y[j]), int(m[j]), float(w[j]))
    return answers


def _outside_roots(reader, y: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """The nearest root beyond the range of readings with none inside: below ``x_min``
    first, then above ``x_max`` (NaN where neither); ``found`` False where a search failed."""
    below, found = first_crossings(reader.lo, reader.ladder(-1),
                                   lambda x, r: reader.f(x) - y[r], y.size)
    rest = np.flatnonzero(np.isnan(below) & found)
    above, found_above = first_crossings(reader.hi, reader.ladder(+1),
                                         lambda x, r: reader.f(x) - y[rest[r]], rest.size)
    below[rest], found[rest] = above, found_above
    return below, found


def _estimates(reader, y: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """The single root in the range of each reading (``settled``), and which readings have
    none (``unreached``); neither where there are several or the search failed."""
    grid = reader.grid
    zero_at, change_at, n_zero, n_change = _grid_crossings(reader.values, y)
    x_hat = np.full(y.size, math.nan)
    on_grid = (n_zero == 1) & (n_change == 0)
    x_hat[on_grid] = grid[zero_at[on_grid]]
    crossing = np.flatnonzero((n_zero == 0) & (n_change == 1))
    settled = on_grid.copy()
    if crossing.size:
        i = change_at[crossing]
        roots, resolved = brent_many(lambda x, r: reader.f(x) - y[crossing[r]],
                                     grid[i], grid[i + 1])
        x_hat[crossing] = roots
        settled[crossing] = resolved
    return x_hat, settled, (n_zero == 0) & (n_change == 0)


def _grid_crossings(values: np.ndarray, y: np.ndarray, table: bool = False):
    """Per reading: the first grid index where ``values == y``, the first interval where
    ``values - y`` changes sign, and how many of each. By binary search when the values
    are finite and strictly monotone (one of either at most), else (or ``table``) on a
    full table of readings by grid points."""
    step = np.diff(values)
    if not table and np.all(np.isfinite(values)) and (np.all(step > 0) or np.all(step < 0)):
        rising = step[0] > 0
        ordered = values if rising else values[::-1]
        pos = np.searchsorted(ordered, y, side="left")
        hit = (pos < ordered.size) & (ordered[np.minimum(pos, ordered.size - 1)] == y)
        inside = ~hit & (pos > 0) & (pos < ordered.size)
        if not rising:  # index in the reversed order back to the grid's
            zero_at, change_at = ordered.size - 1 - pos, ordered.size - 1 - pos
        else:
            zero_at, change_at = pos, pos - 1
        return (np.clip(zero_at, 0, None), np.clip(change_at, 0, None), hit.astype(int),
                inside.astype(int))
    gap = values[None, :] - y[:, None]
    zero = gap == 0.0
    change = np.sign(gap[:, :-1]) * np.sign(gap[:, 1:]) < 0
    return (np.argmax(zero, axis=1), np.argmax(change, axis=1), zero.sum(axis=1),
            change.sum(axis=1))


def _intervals(reader, x_hat, y, m):
    """Interval limits and band status of each estimate; ``fallback`` where a batched
    search failed (the reading is redone by the scalar path). Readings are taken by
    replicate count times weight ``m`` (one band each)."""
    count = y.size
    lower, upper = np.full(count, math.nan), np.full(count, math.nan)
    status = np.full(count, "interval_undefined", dtype=object)
    fallback = np.zeros(count, dtype=bool)
    if no_residual_variance(reader.fitted):  # an exact fit: no interval can be given
        status[:] = NO_RESIDUAL_VARIANCE
        return lower, upper, status, fallback
    whole = m == np.round(m)
    for k in np.unique(m[whole]):  # whole counts: one band each
        band_lo, band_up = reader.band(float(k))
        rows = np.flatnonzero(m == k)
        if np.all(np.isfinite(band_lo)) and np.all(np.isfinite(band_up)):
            lower[rows], upper[rows], status[rows], fallback[rows] = _band_limits(
                reader, band_lo[None, :], band_up[None, :], x_hat[rows], y[rows], m[rows])
    weighted = np.flatnonzero(~whole)  # m times a weight: one table row per reading
    if weighted.size:
        band_lo, band_up = reader.band_table(m[weighted])
        good = np.isfinite(band_lo).all(axis=1) & np.isfinite(band_up).all(axis=1)
        rows = weighted[good]
        if rows.size:
            lower[rows], upper[rows], status[rows], fallback[rows] = _band_limits(
                reader, band_lo[good], band_up[good], x_hat[rows], y[rows], m[rows])
    return lower, upper, status, fallback


def _band_limits(reader, band_lo, band_up, x_hat, y, m):
    """Limits and status for readings sharing one (finite) band (a row of ``band_lo`` and
    ``band_up``), or each with its own (one row per reading). ``h > 0`` (the band
    leaves y0) is, exactly, ``lower > y0 or upper < y0``, taken as a table of booleans."""
    grid, size = reader.grid, reader.grid.size
    leaves = (band_lo > y[:, None]) | (band_up < y[:, None])  # bands: one row, or per reading
    columns = np.arange(size)[None, :]
    nearest_left = np.searchsorted(grid, x_hat, side="left") - 1  # last grid x < x_hat
    nearest_right = np.searchsorted(grid, x_hat, side="right")  # first grid x > x_hat
    reverse = np.ascontiguousarray(leaves[:, ::-1])  # last-true searches run forwards
    left = reverse & (columns >= (size - 1 - nearest_left)[:, None])
    right = leaves & (columns >= nearest_right[:, None])
    has_left, has_right = left.any(axis=1), right.any(axis=1)
    j_left = size - 1 - np.argmax(left, axis=1)
    j_right = np.argmax(right, axis=1)
    near_left = np.where(j_left == nearest_left, x_hat, grid[np.minimum(j_left + 1, size - 1)])
    near_right = np.where(j_right == nearest_right, x_hat, grid[np.maximum(j_right - 1, 0)])
    a = np.concatenate([grid[j_left][has_left], near_right[has_right]])
    b = np.concatenate([near_left[has_left], grid[j_right][has_right]])
    owners = np.concatenate([np.flatnonzero(has_left), np.flatnonzero(has_right)])
    roots, resolved = brent_many(
        lambda x, r: reader.outside_band(x, y[owners[r]], m[owners[r]]), a, b)
    split = int(has_left.sum())
    lo_x, hi_x = np.full(y.size, math.nan), np.full(y.size, math.nan)
    failed = np.zeros(y.size, dtype=bool)
    lo_x[has_left], hi_x[has_right] = roots[:split], roots[split:]
    failed[owners] |= ~resolved
    for direction, limit, need in ((-1, lo_x, ~has_left), (+1, hi_x, ~has_right)):
        need = np.flatnonzero(need & ~failed)
        limit[need], ok = _limits_beyond(reader, direction, y[need], m[need])
        failed[need] |= ~ok
    # no lower crossing down to x = 0 on a curve defined for x >= 0: cut at that edge
    open_low = np.flatnonzero(np.isnan(lo_x) & ~failed)
    at_edge = np.zeros(y.size, dtype=bool)
    at_edge[open_low] = reader.holds_at_edge(y[open_low], m[open_low])
    lo_x[at_edge] = 0.0
    # the band contains y0 somewhere outside [lo_x, hi_x]: at its first or last such point
    inside = ~leaves
    first_in = np.argmax(inside, axis=1)
    last_in = size - 1 - np.argmax(~reverse, axis=1)
    with np.errstate(invalid="ignore"):
        disjoint = inside.any(axis=1) & ((grid[first_in] < lo_x) | (grid[last_in] > hi_x))
        exceeds = (lo_x < reader.lo) | (hi_x > reader.hi)
    unbounded = np.isnan(lo_x) | np.isnan(hi_x)
    status = np.where(unbounded, "interval_unbounded", np.where(
        at_edge, "interval_at_domain_edge", np.where(
            exceeds, "interval_exceeds_range", np.where(disjoint, "interval_disjoint", "ok"))))
    return lo_x, hi_x, status.astype(object), failed


def _limits_beyond(reader, direction: int, y: np.ndarray, m: np.ndarray):
    """Interval limits beyond one end of the range, on the ladder (NaN: unbounded)."""
    end = reader.lo if direction < 0 else reader.hi
    return first_crossings(end, reader.ladder(direction),
                           lambda x, r: reader.outside_band(x, y[r], m[r]), y.size)
