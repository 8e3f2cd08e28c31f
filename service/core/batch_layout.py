"""How a batch is laid out for the engine: screening and chunks.

Internal to :mod:`service.core.batch`. Series are held back to back in flat
arrays with ``offsets``; the engine reads each series in place, so series of
any mix of lengths need no padding and no copies.
"""

from __future__ import annotations

import numpy as np

from service.core import transforms
from service.core.inputs import TINY_LIMIT

CHUNK_POINTS = 65_536   # points per kernel call: bounds scratch memory, feeds the threads


def screen(x, y, w, offsets, rows, model, raw):
    """Split rows into those the engine takes and those for the single-series path."""
    lengths = offsets[rows + 1] - offsets[rows]
    bad = (lengths == 0) | np.isin(rows, np.fromiter(raw, dtype=np.int64, count=len(raw)))
    with np.errstate(all="ignore"):
        point_bad = ~(np.isfinite(x) & np.isfinite(y))
        if w is not None:
            point_bad |= ~(np.isfinite(w) & (w > 0))
        for name, values in (("transform_x", x), ("transform_y", y)):
            kind = getattr(model, name)
            if kind != "none":
                test = transforms._DOMAIN[kind][0]
                point_bad |= ~test(values)
    hits = np.flatnonzero(point_bad)                 # usually empty: cheap to locate
    if hits.size:
        bad_series = np.unique(np.searchsorted(offsets, hits, side="right") - 1)
        bad |= np.isin(rows, bad_series)
    bad |= _magnitude_bad(x, y, w, offsets, rows, model)
    return rows[~bad], rows[bad]


def _magnitude_bad(x, y, w, offsets, rows, model):
    """Rows with values whose squares would overflow or underflow float64 sums.

    Same limits as :func:`service.core.inputs.check_magnitude` (those rows go to
    the single-series path, which refuses them with its DataError).
    """
    sizes = np.diff(offsets)
    filled = np.flatnonzero(sizes > 0)
    n = np.maximum(sizes[rows], 1)
    limit = np.sqrt(np.finfo(float).max / (64.0 * n))
    bad = np.zeros(rows.size, dtype=bool)
    if filled.size == 0:
        return bad
    arrays = [x if model.transform_x == "none" else transforms._FORWARD[model.transform_x](x),
              y if model.transform_y == "none" else transforms._FORWARD[model.transform_y](y)]
    if w is not None:
        arrays.append(w)
    with np.errstate(all="ignore"):
        for values in arrays:
            top = np.zeros(sizes.size)
            top[filled] = np.maximum.reduceat(np.abs(values), offsets[filled])
            t = top[rows]
            bad |= (t > limit) | ((t > 0) & (t < TINY_LIMIT))
    return bad


def chunks(rows, lengths):
    """Cut rows (in input order) into chunks of about :data:`CHUNK_POINTS` points.

    A chunk is the unit of work of one kernel call (and of one thread); its
    scratch memory is bounded by its longest series, so memory stays flat in
    the number of series.
    """
    if rows.size == 0:
        return
    ends = np.cumsum(lengths[rows])
    cuts = np.searchsorted(ends, np.arange(CHUNK_POINTS, int(ends[-1]), CHUNK_POINTS),
                           side="right")
    start = 0
    for stop in [*np.unique(cuts).tolist(), rows.size]:
        if stop > start:
            yield rows[start:stop]
            start = stop
