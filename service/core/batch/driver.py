"""Many independent series at once: grouping, chunking, and per-series isolation.

Entry points::

    fit_many(x, y, lengths, weights=None, *, model=ModelSpec(), models=None,
             options=FitOptions(), detail="summary", workers=1) -> BatchResult
    fit_batch(series, ...)  # series: iterable of (x, y) or (x, y, weights)

Series arrive concatenated (``x``, ``y`` and optional ``weights`` flat, with
``lengths``), which is how long-format tables and NDJSON streams hold them.
Rows are grouped by model and cut into chunks of about
:data:`~service.core.batch.layout.CHUNK_POINTS` points; each chunk is one call
of the compiled kernel (:mod:`service.core.batch.kernel`, driven by
:mod:`service.core.batch.engine`), which reads every series in place, so
working memory per chunk is bounded and independent of the number of series.

A series the engine should not take — missing or non-finite values, weights
<= 0, a transform domain error, too few distinct x for the candidates, an
ill-conditioned design (condition number over 1e6), or ``detail="full"`` —
goes through :func:`service.core.fit_series` itself, so it gets exactly the
single-series answer or typed error. One bad series never fails the others.

A caller's budget (:mod:`service.core.interrupt`) is checked between chunks and between
series fitted one by one, never inside a compiled call.
"""

from __future__ import annotations

from concurrent.futures import ThreadPoolExecutor
from dataclasses import replace

import numpy as np

from service.core.batch import engine as batch_engine
from service.core.batch import layout
from service.core.batch.results import (
    BatchResult,
    empty_columns,
    fill_from_report,
    reset_rows,
    write_chunk,
)
from service.core.checks.known_sd import KNOWN_SD
from service.core.data import transforms
from service.core.errors import FitError
from service.core.families import family, fit_series
from service.core.interrupt import checkpoint
from service.core.polynomial.spec_check import check_spec
from service.core.spec import FitOptions, ModelSpec

DETAILS = ("summary", "full")
_SUMMARY_INCLUDE = frozenset({"coefficients", "statistics", "selection", "diagnostics"})


_MODEL = ModelSpec()
_OPTIONS = FitOptions()


def fit_batch(series, *, model: ModelSpec = _MODEL, models=None,
              options: FitOptions = _OPTIONS, detail: str = "summary",
              workers: int = 1) -> BatchResult:
    """Fit an iterable of ``(x, y)`` or ``(x, y, weights)`` tuples; see :func:`fit_many`.

    A series whose parts are not flat numeric arrays of equal length gets its
    typed error; the others are fitted.
    """
    xs, ys, ws, pre = [], [], [], {}
    any_w = False
    for i, item in enumerate(series):
        x, y, w = (tuple(item) + (None,))[:3]
        if w is None and options.weighting == KNOWN_SD:
            pre[i] = (x, y, None)   # the single fit refuses it, naming weights
        try:
            xa = np.asarray(x, dtype=float).ravel()
            ya = np.asarray(y, dtype=float).ravel()
            wa = None if w is None else np.asarray(w, dtype=float).ravel()
            if np.ndim(x) != 1 or np.ndim(y) != 1 or ya.size != xa.size or (
                    wa is not None and (np.ndim(w) != 1 or wa.size != xa.size)):
                raise ValueError
        except (TypeError, ValueError):
            pre[i] = (x, y, w)
            xa = ya = np.empty(0)
            wa = None
        any_w |= wa is not None
        xs.append(xa)
        ys.append(ya)
        ws.append(wa)
    lengths = np.array([a.size for a in xs], dtype=np.int64)
    weights = None
    if any_w:
        weights = np.concatenate([np.ones(a.size) if w is None else w
                                  for a, w in zip(xs, ws, strict=True)]) if xs else np.empty(0)

    def cat(parts):
        return np.concatenate(parts) if parts else np.empty(0)

    return fit_many(cat(xs), cat(ys), lengths, weights, model=model, models=models,
                    options=options, detail=detail, workers=workers, _raw=pre)


def fit_many(x, y, lengths, weights=None, *, model: ModelSpec = _MODEL, models=None,
             options: FitOptions = _OPTIONS, detail: str = "summary",
             workers: int = 1, _raw: dict | None = None) -> BatchResult:
    """Fit ``len(lengths)`` series held back to back in flat arrays.

    Parameters
    ----------
    x, y : array_like, 1-D
        All series concatenated; series ``i`` has ``lengths[i]`` points.
    lengths : array_like of int
    weights : array_like or None
        Inverse variances, concatenated like ``x``; None for equal weights.
    model : ModelSpec
        Shared model; ``models`` (a sequence of ModelSpec or None per series)
        overrides it series by series.
    options : FitOptions
        ``level``, ``missing`` and ``weighting`` apply; the summary has no grid. With
        ``weighting="known_sd"`` a series without weights gets the single fit's error
        (field ``weights``).
    detail : {"summary", "full"}
        ``"full"`` fits every series with :func:`fit_series` (with ``options``
        as given) and keeps each report in ``BatchResult.reports``.
    workers : int
        Threads fitting blocks in parallel (numpy releases the GIL).

    Returns
    -------
    BatchResult
        One row per series in input order.
    """
    if detail not in DETAILS:
        raise ValueError(f"detail must be one of {DETAILS}, not {detail!r}")
    x, y, w, lengths, offsets = layout.flat_series(x, y, weights, lengths)
    G = lengths.size
    raw = _raw or {}
    known = options.weighting == KNOWN_SD
    groups: dict[ModelSpec, list[int]] = {}
    if models is None:
        groups[model] = list(range(G))
    else:
        for i, m in enumerate(models):
            groups.setdefault(model if m is None else m, []).append(i)
    out = empty_columns(G, *_widths(groups, options), filled=False)  # written in parallel
    out["errors"], out["reports"] = {}, {}
    jobs, fallback = [], []
    for spec_model, rows in groups.items():
        rows = np.asarray(rows, dtype=np.int64)
        try:
            if not family(spec_model.family).compiled_batch:
                family(spec_model.family).check_spec(spec_model, options)
                fallback.extend((int(r), spec_model) for r in rows)
                continue
            dmin, dmax, selects = check_spec(spec_model, options)
        except FitError as exc:
            for r in rows:
                out["errors"][int(r)] = exc
            continue
        if detail == "full" or (known and w is None):  # no SDs: the single fit's error
            fallback.extend((int(r), spec_model) for r in rows)
            continue
        bspec = batch_engine.BlockSpec(dmin, dmax, spec_model.intercept,
                                      spec_model.select if selects else "fixed",
                                      float(spec_model.alpha),
                                      need_press=selects and spec_model.select == "press",
                                      known=known)
        good, bad = layout.screen(x, y, w, offsets, rows, spec_model, raw)
        fallback.extend((int(r), spec_model) for r in bad)
        if good.size:
            u = transforms._FORWARD[spec_model.transform_x](x)
            z = transforms._FORWARD[spec_model.transform_y](y)
            tabs = batch_engine.tables(lengths[good], bspec.max_degree + bspec.c)
            for chunk in layout.chunks(good, lengths):
                jobs.append((chunk, spec_model, bspec, u, z, tabs))
    marks = np.zeros(x.size, dtype=np.uint8)
    resid = np.empty(x.size)

    def run(job):
        chunk, _, bspec, u, z, tabs = job
        checkpoint()  # a caller's budget is checked between chunks, never inside the kernel
        with np.errstate(all="ignore"):  # undefined values become NaN data, not warnings
            res, rejected = batch_engine.fit_chunk(u, z, w, offsets, chunk, bspec, tabs,
                                                   marks, resid)
        write_chunk(out, res, bspec)   # chunks own disjoint rows: threads write in parallel
        return rejected

    if workers > 1 and len(jobs) > 1:
        with ThreadPoolExecutor(workers) as pool:
            results = list(pool.map(run, jobs))
    else:
        results = [run(job) for job in jobs]
    for (_, spec_model, *_), rejected in zip(jobs, results, strict=True):
        fallback.extend((int(r), spec_model) for r in rejected)
    unset = np.flatnonzero(~out["ok"])
    if unset.size:   # errors and single-series rows start from the defaults
        reset_rows(out, unset)
    single = options if detail == "full" else replace(options, grid=None,
                                                      include=_SUMMARY_INCLUDE)
    for row, spec_model in sorted(fallback):
        checkpoint()
        _fit_one(out, row, spec_model, single, x, y, w, offsets, raw)
    return BatchResult(**out)


def _widths(groups, options) -> tuple[int, int]:
    """Coefficient and candidate columns needed by the models in use."""
    p = c = 1
    for m in groups:
        try:
            if not family(m.family).compiled_batch:
                continue
            dmin, dmax, _ = check_spec(m, options)
        except FitError:
            continue
        p, c = max(p, dmax + 1), max(c, dmax - dmin + 1)
    return p, c


def _series(x, y, w, offsets, row, raw):
    if row in raw:
        return raw[row]
    a, b = offsets[row], offsets[row + 1]
    return x[a:b], y[a:b], None if w is None else w[a:b]


def _fit_one(out, row, model, options, x, y, w, offsets, raw):
    xs, ys, ws = _series(x, y, w, offsets, row, raw)
    try:
        with np.errstate(all="ignore"):  # extreme inputs: undefined values are NaN data
            report = fit_series(xs, ys, ws, model=model, options=options)
    except FitError as exc:
        out["errors"][row] = exc
        return
    out["reports"][row] = report
    fill_from_report(out, row, report)


def fit_chunks(series, *, chunk_series: int = 4096, model: ModelSpec = _MODEL,
               options: FitOptions = _OPTIONS, detail: str = "summary", workers: int = 1):
    """Fit an iterable of series chunk by chunk, for streams of any length.

    ``series`` yields ``(x, y)``, ``(x, y, weights)`` or ``(x, y, weights, model)``
    (model None: the shared ``model``). Yields ``(first_index, BatchResult)``
    per chunk of at most ``chunk_series`` series, so memory is bounded by the
    chunk, not by the stream.
    """
    buf, models, start = [], [], 0
    for item in series:
        item = tuple(item)
        buf.append(item[:3])
        models.append(item[3] if len(item) > 3 else None)
        if len(buf) >= chunk_series:
            yield start, fit_batch(buf, model=model, models=models, options=options,
                                   detail=detail, workers=workers)
            start += len(buf)
            buf, models = [], []
    if buf:
        yield start, fit_batch(buf, model=model, models=models, options=options,
                               detail=detail, workers=workers)

