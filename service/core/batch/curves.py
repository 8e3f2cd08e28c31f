"""Many series, one nonlinear family: the compiled engine, and the single fit where it must.

Entry point::

    fit_many_curves(x, y, lengths, weights=None, *, model, options=FitOptions(),
                    workers=1, detail="summary", always_grid=False) -> CurveBatchResult

Series arrive concatenated like :func:`service.core.batch.driver.fit_many`'s.
Every series is fitted with automatic start values (a built-in family) or with
the model's start values (the ``expression`` family), on its own: a series that
cannot be fitted gets its typed error (code, field, message) and the others
are fitted.

The compiled engine (:mod:`.curves_kernel`) takes the series of the families in
:data:`~service.core.batch.curves_models.COMPILED` when the model holds no
fixed values, bounds or start values: finite data, weights > 0, at least
p + 2 points and x >= 0 on the log scale, for power and for weibull. With
``weighting="known_sd"`` the least-squares fit is the same and only the
inference differs (unscaled standard errors, the likelihood at the known
variances, the chi-square goodness-of-fit test: :mod:`.curves_post`); a
known-SD batch without weights goes through the single fit, which refuses every
series naming ``weights``. Chunks
of series go to a thread pool (the kernel releases the GIL). Every other
series, each series the kernel hands back (no converged start, a singular
tangent plane, an exact fit), and every series with ``detail="full"`` goes
through the family's single fit (:func:`service.core.families.fit_series`,
without a grid), so it gets exactly the single-series answer or error.

A caller's budget (:mod:`service.core.interrupt`) is checked between chunks and
between series fitted one by one.
"""

from __future__ import annotations

from concurrent.futures import ThreadPoolExecutor
from dataclasses import replace
from functools import lru_cache

import numpy as np

from service.core.batch import layout
from service.core.batch.curves_kernel import STATS, fit_rows
from service.core.batch.curves_models import (
    COMPILED,
    L4_LOG,
    L5_LOG,
    N_PARAMETERS,
    POWER,
    WEIBULL,
)
from service.core.batch.curves_points import screen
from service.core.batch.curves_post import STARTS, finish
from service.core.batch.curves_resolve import settle
from service.core.batch.curves_results import (
    CurveBatchResult,
    empty_curve_columns,
    fill_from_report,
)
from service.core.checks.diagnostics import cut_offs
from service.core.checks.known_sd import KNOWN_SD
from service.core.checks.shapiro_tables import SHAPIRO_MAX_N, shapiro_weights
from service.core.errors import FitError
from service.core.families import family
from service.core.interrupt import checkpoint
from service.core.nonlinear.builtin.catalogue import BUILTINS
from service.core.nonlinear.builtin.spec_check import equation, scale_of
from service.core.spec import WEIGHTINGS, FitOptions, ModelSpec

DETAILS = ("summary", "full")
CHUNK_SERIES = 1024
_OPTIONS = FitOptions()


def parameter_names(model: ModelSpec) -> tuple[str, ...]:
    """The fitted parameters of a nonlinear model, in report order (typed error if invalid)."""
    entry = family(model.family)
    if model.family == "expression":
        return tuple(name for name, _ in model.parameters or ())
    if model.family not in BUILTINS:
        raise ValueError(f"{entry.name} is not a nonlinear family")
    builtin = BUILTINS[model.family]
    return equation(builtin.name, scale_of(builtin, model), tuple(model.fixed or ())
                    ).parameter_names


def compiled_family(model: ModelSpec, options: FitOptions) -> int | None:
    """The compiled family id for this model and options, or None (single-fit engine).

    Either weighting qualifies (relative or known SDs: the same least-squares fit)."""
    builtin = BUILTINS.get(model.family)
    if builtin is None or model.fixed or model.lower or model.upper or model.parameters \
            or options.weighting not in WEIGHTINGS:
        return None
    return COMPILED.get((builtin.name, scale_of(builtin, model)))


@lru_cache(maxsize=64)
def _cut_tables(p: int, top: int) -> tuple[np.ndarray, np.ndarray]:
    """Outlier t and Cook's distance cut-offs for every n up to ``top`` (NaN below p + 2)."""
    t, cook = np.full(top + 1, np.nan), np.full(top + 1, np.nan)
    for n in range(p + 2, top + 1):
        bonf, _, cook_cut = cut_offs(n, p, n - p)
        t[n], cook[n] = bonf, cook_cut
    t.setflags(write=False)
    cook.setflags(write=False)
    return t, cook


def _shapiro_table(lengths: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Shapiro-Wilk weights of every length in ``lengths``, back to back: ``(start, coef)``
    with ``coef[start[n]:start[n] + n]`` the weights for n points (``start[n]`` -1 outside
    3..SHAPIRO_MAX_N)."""
    start = np.full(int(lengths.max()) + 1, -1, dtype=np.int64)
    parts, at = [], 0
    for n in np.flatnonzero(np.bincount(lengths)).tolist():      # the lengths present
        if 3 <= n <= SHAPIRO_MAX_N:
            start[n] = at
            parts.append(shapiro_weights(n))
            at += n
    return start, (np.concatenate(parts) if parts else np.empty(0))


def fit_many_curves(x, y, lengths, weights=None, *, model: ModelSpec,
                    options: FitOptions = _OPTIONS, workers: int = 1, detail: str = "summary",
                    always_grid: bool = False) -> CurveBatchResult:
    """Fit ``len(lengths)`` series held back to back with the nonlinear ``model``.

    Parameters
    ----------
    x, y : array_like, 1-D
        All series concatenated; series ``i`` has ``lengths[i]`` points.
    lengths : array_like of int
    weights : array_like or None
        Inverse variances, concatenated like ``x``; None for equal weights.
    model : ModelSpec
        A built-in nonlinear family or ``expression`` (its start values serve every series).
    options : FitOptions
        ``level``, ``missing`` and ``weighting`` apply; the grid only with ``detail="full"``.
    workers : int
        Threads fitting chunks of series in parallel.
    detail : {"summary", "full"}
        ``"full"`` fits every series with the single fit and keeps its report.
    always_grid : bool
        Solve from the grid's best point as well as the shape start (the single fit's
        two main starts) even when the shape start converged: slower, for checking.

    Returns
    -------
    CurveBatchResult
    """
    if detail not in DETAILS:
        raise ValueError(f"detail must be one of {DETAILS}, not {detail!r}")
    x, y, w, lengths, offsets = layout.flat_series(x, y, weights, lengths)
    G = lengths.size
    try:
        entry = family(model.family)
        entry.check_spec(model, options)
        names = parameter_names(model)
    except FitError as exc:
        out = empty_curve_columns(G, 0)
        out["errors"] = dict.fromkeys(range(G), exc)
        return CurveBatchResult(model.family, (), **out)
    out = empty_curve_columns(G, len(names))
    out["names"] = names
    known = options.weighting == KNOWN_SD
    fid = compiled_family(model, options) if detail == "summary" else None
    if known and w is None:   # no SDs: the single fit's error for every series
        fid = None
    single = np.arange(G)
    if fid is not None:
        single = _compiled(out, fid, x, y, w, lengths, offsets, workers, always_grid,
                           (model, options))
    plain = options if detail == "full" else replace(options, grid=None)
    for row in single.tolist():
        checkpoint()
        a, b = offsets[row], offsets[row + 1]
        try:
            with np.errstate(all="ignore"):
                report = entry.fit(x[a:b], y[a:b], None if w is None else w[a:b],
                                   model=model, options=plain)
        except FitError as exc:
            out["errors"][row] = exc
            continue
        fill_from_report(out, row, report)
        if detail == "full":
            out["reports"][row] = report
    del out["names"]
    return CurveBatchResult(model.family, names, **out)


def _compiled(out, fid, x, y, w, lengths, offsets, workers, always_grid, spec) -> np.ndarray:
    """Fit the rows the kernel may take; return the rows left for the single fit.

    ``spec`` is ``(model, options)``; a provisional row (a start failed in the kernel)
    stands when :func:`.curves_resolve.settle` says so."""
    model, options = spec
    known = options.weighting == KNOWN_SD
    p = N_PARAMETERS[fid]
    G = lengths.size
    take = np.flatnonzero(screen(x, y, np.empty(0) if w is None else w, offsets,
                                 fid in (L4_LOG, L5_LOG, POWER, WEIBULL), p + 2))
    if take.size == 0:
        return np.arange(G)
    cut_t, cut_cook = _cut_tables(p, int(lengths[take].max()))
    sw_start, sw_coef = _shapiro_table(lengths[take])
    wk = np.empty(0) if w is None else w
    status = np.ones(G, dtype=np.int64)
    stats = np.full((G, len(STATS)), np.nan)
    est, se = out["estimates"], out["std_errors"]

    def run(chunk):
        checkpoint()  # a caller's budget is checked between chunks, never inside the kernel
        with np.errstate(all="ignore"):
            fit_rows(fid, x, y, wk, offsets, chunk, cut_t, cut_cook, sw_start, sw_coef,
                     always_grid, est, se, stats, status)

    chunks = [take[i:i + CHUNK_SERIES] for i in range(0, take.size, CHUNK_SERIES)]
    if workers > 1 and len(chunks) > 1:
        with ThreadPoolExecutor(workers) as pool:
            list(pool.map(run, chunks))
    else:
        for chunk in chunks:
            run(chunk)
    provisional = np.flatnonzero(status >= 2)
    if provisional.size:
        kept = stats[provisional]
        stands, renamed = settle(model, options, x, y, w, offsets, provisional, status,
                                 kept[:, STATS.index("rss")],
                                 [STARTS[int(code)] for code in kept[:, STATS.index("start")]],
                                 est[provisional])
        status[provisional] = np.where(stands, 0, 1)
        for row, name in zip(provisional.tolist(), renamed, strict=True):
            if name is not None:        # the single fit's name of the start of this fit
                stats[row, STATS.index("start")] = STARTS.index(name)
    done = np.flatnonzero(status == 0)
    if done.size == G:                    # every row: slices, no gathering
        finish(out, slice(None), stats, lengths, p, known)
        return np.empty(0, dtype=np.int64)
    if done.size:
        finish(out, done, stats[done], lengths[done], p, known)
    left = np.flatnonzero(status != 0)
    est[left] = np.nan
    se[left] = np.nan
    return left
