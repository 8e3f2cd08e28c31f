"""How a batch is laid out for the engine: screening and chunks.

Internal to :mod:`service.core.batch.driver`. Series are held back to back in flat
arrays with ``offsets``; the engine reads each series in place, so series of
any mix of lengths need no padding and no copies.
"""

from __future__ import annotations

import numpy as np

from service.core.data import transforms
from service.core.data.inputs import MAX_WEIGHT_RATIO

CHUNK_POINTS = 131_072   # points per kernel call: bounds scratch memory, feeds the threads


def flat_series(x, y, weights, lengths):
    """Series held back to back as contiguous float arrays, with their ``offsets``.

    Returns
    -------
    x, y, w, lengths, offsets
        ``w`` is None without weights; series ``i`` is ``offsets[i]:offsets[i + 1]``.

    Raises
    ------
    ValueError
        ``x``, ``y`` (or the weights) do not hold ``sum(lengths)`` values each.
    """
    x, y = _kernel_floats(x), _kernel_floats(y)
    lengths = np.asarray(lengths, dtype=np.int64)
    w = None if weights is None else _kernel_floats(weights)
    offsets = np.zeros(lengths.size + 1, dtype=np.int64)
    np.cumsum(lengths, out=offsets[1:])
    if offsets[-1] != x.size or y.size != x.size or (w is not None and w.size != x.size):
        raise ValueError("x, y (and weights) must hold sum(lengths) values each")
    return x, y, w, lengths, offsets


def _kernel_floats(values) -> np.ndarray:
    """Contiguous, writeable float64. numba compiles every kernel again for read-only
    arrays (another type), and an Arrow column read in place is read-only: such input is
    copied (one pass over the values, small beside the fits) instead of paying that compile
    in the first Arrow request of every fresh install."""
    array = np.ascontiguousarray(values, dtype=float)
    return array if array.flags.writeable else array.copy()


def screen(x, y, w, offsets, rows, model, raw):
    """Split rows into those the engine takes and those for the single-series path.

    Empty and malformed series go to the single-series path here. Non-finite values,
    weights <= 0 and extreme magnitudes are found by the kernel as it reads each
    series (:func:`service.core.batch.kernel.fit_rows`); only a transform's domain is
    checked here, on the raw values (``1 / inf`` would look finite afterwards), and the spread
    of the weights (over :data:`~service.core.data.inputs.MAX_WEIGHT_RATIO` the single-series
    path refuses the series, naming its weights).
    """
    lengths = offsets[rows + 1] - offsets[rows]
    bad = (lengths == 0) | np.isin(rows, np.fromiter(raw, dtype=np.int64, count=len(raw)))
    if w is not None:
        bad |= np.isin(rows, _wide_weights(w, offsets))
    kinds = [(getattr(model, name), values)
             for name, values in (("transform_x", x), ("transform_y", y))]
    if any(kind != "none" for kind, _ in kinds):
        with np.errstate(all="ignore"):
            point_bad = ~(np.isfinite(x) & np.isfinite(y))
            for kind, values in kinds:
                if kind != "none":
                    point_bad |= ~transforms._DOMAIN[kind][0](values)
        hits = np.flatnonzero(point_bad)
        if hits.size:
            bad_series = np.unique(np.searchsorted(offsets, hits, side="right") - 1)
            bad |= np.isin(rows, bad_series)
    return rows[~bad], rows[bad]


def _wide_weights(w, offsets):
    """Series whose weights span more than MAX_WEIGHT_RATIO (or are not all positive)."""
    nonempty = np.flatnonzero(np.diff(offsets) > 0)
    if nonempty.size == 0:
        return nonempty
    starts = offsets[nonempty]
    with np.errstate(all="ignore"):
        fine = np.maximum.reduceat(w, starts) <= MAX_WEIGHT_RATIO * np.minimum.reduceat(w, starts)
    return nonempty[~fine]


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
