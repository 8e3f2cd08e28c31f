"""How a batch is laid out for the engine: screening, blocks of similar length, padding.

Internal to :mod:`service.core.batch`. Series are held back to back in flat
arrays with ``offsets``; a block is a set of rows gathered into ``(G, L)``
arrays, padded with weight-0 points where a row is shorter than ``L``.
"""

from __future__ import annotations

import numpy as np

from service.core import transforms
from service.core.inputs import TINY_LIMIT

BLOCK_POINTS = 65_536   # points per block: fits in cache, bounds working memory
MAX_PAD_RATIO = 1.15    # a block pads its rows to at most 15% above its shortest


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


def blocks(rows, lengths):
    """Cut rows (sorted by length) into blocks of similar length and bounded size.

    A block holds at most :data:`BLOCK_POINTS` points and pads rows by at most
    :data:`MAX_PAD_RATIO`; a run of one length long enough to fill a quarter of
    a block is kept apart, so it needs no padding at all.
    """
    if rows.size == 0:
        return
    order = rows[np.argsort(lengths[rows], kind="stable")]
    lens = lengths[order]
    start = 0
    while start < order.size:
        lo = lens[start]
        cap = max(8, BLOCK_POINTS // max(int(lo), 1))
        limit = np.searchsorted(lens, np.floor(lo * MAX_PAD_RATIO) + 1, side="left")
        stop = int(min(order.size, start + cap, max(limit, start + 1)))
        run_end = int(np.searchsorted(lens, lo, side="right"))
        if stop > run_end >= start + cap // 4:
            stop = run_end   # a long run of one length makes an unpadded block on its own
        width = lens[stop - 1]
        stop = int(min(stop, start + max(8, BLOCK_POINTS // max(int(width), 1))))
        yield order[start:stop]
        start = stop


def gather_index(offsets, rows, lens, width):
    """What :func:`gather` needs for one block: a slice start, or point indices and a mask."""
    if np.all(lens == width) and rows[-1] - rows[0] == rows.size - 1 and np.all(
            np.diff(rows) == 1):                      # consecutive equal-length rows: a view
        return int(offsets[rows[0]]), None
    idx = offsets[rows][:, None] + np.arange(width)[None, :]
    if np.all(lens == width):
        return idx, None
    inside = np.arange(width)[None, :] < lens[:, None]
    return np.where(inside, idx, 0), inside


def take(values, index, rows, width, fill=0.0):
    """Gather one flat array into a block, using :func:`gather_index`'s answer."""
    idx, inside = index
    if isinstance(idx, int):
        return values[idx:idx + rows.size * width].reshape(rows.size, width)
    out = values[idx]
    return out if inside is None else np.where(inside, out, fill)


def gather(values, offsets, rows, lens, width, fill=0.0):
    if np.all(lens == width) and rows[-1] - rows[0] == rows.size - 1 and np.all(
            np.diff(rows) == 1):                      # consecutive equal-length rows: a view
        a = offsets[rows[0]]
        return values[a:a + rows.size * width].reshape(rows.size, width)
    idx = offsets[rows][:, None] + np.arange(width)[None, :]
    if np.all(lens == width):
        return values[idx]
    inside = np.arange(width)[None, :] < lens[:, None]
    return np.where(inside, values[np.where(inside, idx, 0)], fill)


def distinct(u, valid, lens):
    """Distinct x per row, and whether every row is strictly increasing (no sort needed)."""
    steps = np.diff(u, axis=1) > 0
    if valid is not None:
        steps &= valid[:, 1:]
    distinct = 1 + steps.sum(axis=1)
    unsorted = np.flatnonzero(distinct < lens)
    if unsorted.size:
        sub = u[unsorted] if valid is None else np.where(valid[unsorted], u[unsorted], np.inf)
        steps = np.diff(np.sort(sub, axis=1), axis=1) > 0
        if valid is not None:
            steps &= valid[unsorted, 1:]
        distinct[unsorted] = 1 + steps.sum(axis=1)
    return distinct, unsorted.size == 0


def scatter(out: dict, res: dict | None, bspec) -> None:
    """Write a block's rows into the batch arrays (rows the engine rejected are skipped).

    Consecutive rows are written at once (slices). Scattered rows (ragged input: a
    block holds one length, spread over the input) are queued and written column by
    column in :func:`finish`, which keeps each write inside one column in cache.
    """
    if res is None:
        return
    keep = ~res["bad"] if "bad" in res else slice(None)
    rows = res["rows"][keep]
    if rows.size and rows[-1] - rows[0] == rows.size - 1 and np.all(np.diff(rows) == 1):
        _write(out, slice(int(rows[0]), int(rows[-1]) + 1), [(res, keep)], bspec)
    elif rows.size:
        out.setdefault("_queued", {}).setdefault(
            (id(bspec), res["coef"].shape[1], res["cand_rss"].shape[1]), (bspec, []))[1].append(
            (rows, res, keep))
    _points(out, res)


def finish(out: dict) -> None:
    """Write the queued scattered rows, one column at a time."""
    for bspec, entries in out.pop("_queued", {}).values():
        rows = np.concatenate([r for r, _, _ in entries])
        _write(out, rows, [(res, keep) for _, res, keep in entries], bspec)


def _write(out: dict, rows, parts, bspec) -> None:
    def cat(name):
        chunks = [res[name][keep] for res, keep in parts]
        return chunks[0] if len(chunks) == 1 else np.concatenate(chunks)

    cols = out["columns"]
    first = parts[0][0]
    for name in cols:
        if name in first:
            cols[name][rows] = cat(name)
    cols["min_degree"][rows] = bspec.min_degree
    width = first["coef"].shape[1]
    out["coefficients"][rows, :width] = cat("coef")
    out["std_errors"][rows, :width] = cat("se")
    ncand = first["cand_rss"].shape[1]
    for m in out["candidates"]:
        out["candidates"][m][rows, :ncand] = cat("cand_" + m)
    out["intercept"][rows] = bspec.intercept
    out["select"][rows] = bspec.select
    out["ok"][rows] = True


def _points(out: dict, res: dict) -> None:
    """Record outlying and influential point indices per series."""
    for key, target in (("outlier_points", "outliers"), ("influential_points", "influential")):
        r_idx, c_idx = res[key]
        if r_idx.size:
            store = out.setdefault(target, {})
            bad = res.get("bad")
            for r, c in zip(r_idx.tolist(), c_idx.tolist(), strict=True):
                if bad is None or not bad[r]:
                    key_row = int(res["rows"][r])
                    store[key_row] = store.get(key_row, ()) + (c,)
