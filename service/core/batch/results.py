"""Columnar result of a batch of fits: one row per series, in input order.

The core returns numbers only (NaN for undefined); the wire and DataFrame
layers decide names and turn NaN into null. Rows whose series could not be
fitted have ``ok`` False and their typed error in ``errors``.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from functools import lru_cache

import numpy as np

from service.core.batch.engine import FLAG_CODES, SEVERITIES, ChunkResult
from service.core.errors import FitError
from service.core.results import FitReport, Notice

SCALARS = ("n", "degree", "min_degree", "df_residual", "rss", "sigma", "r_squared",
           "adj_r_squared", "aic", "aicc", "bic", "press", "shapiro_wilk", "shapiro_wilk_p",
           "durbin_watson", "durbin_watson_p", "breusch_pagan", "breusch_pagan_p",
           "lack_of_fit_f", "lack_of_fit_p", "chi_square_fit", "chi_square_fit_p", "n_outliers",
           "n_influential", "n_high_leverage", "flags", "flag_levels")
CANDIDATE_MEASURES = ("df_residual", "rss", "sigma", "r_squared", "adj_r_squared", "aic", "aicc",
                      "bic", "press", "f_last", "p_last")


@lru_cache(maxsize=4096)
def codes_of(mask: int) -> tuple[str, ...]:
    """Flag codes of a bit mask over :data:`FLAG_CODES`, in that order."""
    return tuple(code for i, code in enumerate(FLAG_CODES) if mask >> i & 1)


@lru_cache(maxsize=4096)
def flags_of(mask: int, levels: int, codes: tuple[str, ...] = FLAG_CODES
             ) -> tuple[tuple[str, str], ...]:
    """``(code, severity)`` of each flag of a bit mask over ``codes``, severities from
    ``levels`` (two bits per code, :data:`~service.core.batch.engine.SEVERITIES`)."""
    return tuple((code, SEVERITIES[levels >> 2 * i & 3])
                 for i, code in enumerate(codes) if mask >> i & 1)


def levels_of(flags, codes: tuple[str, ...] = FLAG_CODES) -> tuple[int, int]:
    """Bit mask and severity levels over ``codes`` of a report's :class:`TrustFlag` tuple."""
    mask = levels = 0
    for flag in flags:
        if flag.code in codes:
            i = codes.index(flag.code)
            mask |= 1 << i
            levels |= SEVERITIES.index(flag.severity) << 2 * i
    return mask, levels


@dataclass(frozen=True)
class BatchResult:
    """Results of ``G`` independent fits, aligned with the input order.

    Attributes
    ----------
    ok : (G,) bool
    columns : mapping name -> (G,) array for every name in :data:`SCALARS`
        (``degree``/``min_degree``/``n`` are -1 on error rows; ``flags`` is a bit
        mask over :data:`FLAG_CODES`, ``flag_levels`` their severities, two bits per code).
    coefficients, std_errors : (G, P) raw-x coefficients in entry order, NaN-padded.
    candidates : mapping measure -> (G, C); column j is degree ``min_degree + j``
        (NaN where that candidate was not examined).
    intercept : (G,) bool
    select : (G,) object, the selection method of each row (``"fixed"`` if fixed).
    outliers, influential : mapping row -> tuple of point indices.
    errors : mapping row -> FitError.
    reports : mapping row -> FitReport for rows fitted by the single-series path
        (``detail="full"``, missing values dropped, or special cases).
    notices : mapping row -> tuple of Notice.
    """

    ok: np.ndarray
    columns: Mapping[str, np.ndarray]
    coefficients: np.ndarray
    std_errors: np.ndarray
    candidates: Mapping[str, np.ndarray]
    intercept: np.ndarray
    select: np.ndarray
    outliers: Mapping[int, tuple[int, ...]] = field(default_factory=dict)
    influential: Mapping[int, tuple[int, ...]] = field(default_factory=dict)
    errors: Mapping[int, FitError] = field(default_factory=dict)
    reports: Mapping[int, FitReport] = field(default_factory=dict)
    notices: Mapping[int, tuple[Notice, ...]] = field(default_factory=dict)

    def __len__(self) -> int:
        return int(self.ok.size)

    @property
    def n_ok(self) -> int:
        return int(self.ok.sum())

    codes_of = staticmethod(codes_of)
    flags_of = staticmethod(flags_of)

    def flag_codes(self, row: int) -> tuple[str, ...]:
        """Flag codes of one row, in the order ``fit_series`` lists them."""
        return codes_of(int(self.columns["flags"][row]))

    def flag_severities(self, row: int) -> tuple[tuple[str, str], ...]:
        """``(code, severity)`` of each flag of one row, in the order of :meth:`flag_codes`."""
        return flags_of(int(self.columns["flags"][row]), int(self.columns["flag_levels"][row]))


_INT_COLUMNS = {"n": -1, "degree": -1, "min_degree": -1, "df_residual": 0, "n_outliers": 0,
                "n_influential": 0, "n_high_leverage": 0, "flags": 0, "flag_levels": 0}


def empty_columns(G: int, P: int, C: int, *, filled: bool = True) -> dict:
    """Preallocated output arrays for ``G`` rows: NaN / -1 / 0 / False, or unset.

    ``filled=False`` leaves the numbers unset (no 60 MB of fill at G = 100,000 before
    any fit): every row must then be written (:func:`write_chunk`) or reset
    (:func:`reset_rows`) before it is read. ``ok`` starts False either way.
    """
    alloc = (lambda shape, value, dtype=float: np.full(shape, value, dtype=dtype)) if filled \
        else (lambda shape, value, dtype=float: np.empty(shape, dtype=dtype))
    cols = {name: alloc(G, _INT_COLUMNS[name], np.int64) if name in _INT_COLUMNS
            else alloc(G, np.nan) for name in SCALARS}
    return {"columns": cols, "coefficients": alloc((G, P), np.nan),
            "std_errors": alloc((G, P), np.nan),
            "candidates": {m: alloc((G, C), np.nan) for m in CANDIDATE_MEASURES},
            "ok": np.zeros(G, dtype=bool), "intercept": np.ones(G, dtype=bool),
            "select": np.empty(G, dtype=object)}


def reset_rows(out: dict, rows) -> None:
    """Give rows the values of a filled :func:`empty_columns` (NaN / -1 / 0, not ok)."""
    for name, values in out["columns"].items():
        values[rows] = _INT_COLUMNS.get(name, np.nan)
    for key in ("coefficients", "std_errors"):
        out[key][rows] = np.nan
    for values in out["candidates"].values():
        values[rows] = np.nan
    out["ok"][rows] = False


def fill_from_report(out: dict, row: int, report: FitReport) -> None:
    """Copy one single-series report into row ``row`` of the preallocated arrays."""
    cols = out["columns"]
    st, sel = report.statistics, report.selection
    d = report.diagnostics
    cols["n"][row] = st.n
    cols["degree"][row] = sel.chosen_degree
    cols["min_degree"][row] = sel.candidates[0].degree
    cols["df_residual"][row] = st.df_residual
    for name in ("rss", "r_squared", "adj_r_squared", "aic", "aicc", "bic", "press"):
        cols[name][row] = getattr(st, name)
    cols["sigma"][row] = st.sigma
    if d is not None:
        tests = {t.name: t for t in d.tests}
        for name in ("shapiro_wilk", "breusch_pagan"):
            if name in tests:
                cols[name][row] = tests[name].statistic
                cols[name + "_p"][row] = tests[name].p_value
        if "durbin_watson" in tests:
            cols["durbin_watson"][row] = tests["durbin_watson"].statistic
            cols["durbin_watson_p"][row] = tests["durbin_watson"].p_value
        if "chi_square_fit" in tests:   # known SDs only
            cols["chi_square_fit"][row] = tests["chi_square_fit"].statistic
            cols["chi_square_fit_p"][row] = tests["chi_square_fit"].p_value
        if d.lack_of_fit is not None:
            cols["lack_of_fit_f"][row] = d.lack_of_fit.f
            cols["lack_of_fit_p"][row] = d.lack_of_fit.p_value
        cols["n_outliers"][row] = len(d.outliers)
        cols["n_influential"][row] = len(d.influential)
        cols["n_high_leverage"][row] = len(d.high_leverage)
        if d.outliers:
            out.setdefault("outliers", {})[row] = tuple(d.outliers)
        if d.influential:
            out.setdefault("influential", {})[row] = tuple(d.influential)
    cols["flags"][row], cols["flag_levels"][row] = levels_of(report.flags)
    k = len(report.coefficients)
    width = out["coefficients"].shape[1]
    out["coefficients"][row, :min(k, width)] = [c.estimate for c in report.coefficients][:width]
    out["std_errors"][row, :min(k, width)] = [c.std_error for c in report.coefficients][:width]
    ncand = out["candidates"]["rss"].shape[1]
    for j, cand in enumerate(sel.candidates[:ncand]):
        for m in CANDIDATE_MEASURES:
            out["candidates"][m][row, j] = getattr(cand, m)
    out["intercept"][row] = report.model.intercept
    out["select"][row] = sel.method
    out["ok"][row] = True
    if report.warnings:
        out.setdefault("notices", {})[row] = tuple(report.warnings)


def write_chunk(out: dict, res: ChunkResult, bspec) -> None:
    """Copy the rows a kernel chunk fitted into the preallocated arrays."""
    rows = res.rows
    if rows.size == 0:
        return
    if rows[-1] - rows[0] == rows.size - 1:          # consecutive (rows are increasing)
        rows = slice(int(rows[0]), int(rows[-1]) + 1)
    cols = out["columns"]
    for name, values in res.columns.items():
        cols[name][rows] = values
    cols["min_degree"][rows] = bspec.min_degree
    width = res.coef.shape[1]
    out["coefficients"][rows, :width] = res.coef
    out["std_errors"][rows, :width] = res.se
    out["coefficients"][rows, width:] = np.nan     # wider for another model of the batch
    out["std_errors"][rows, width:] = np.nan
    for m in out["candidates"]:
        values = res.candidates[m]
        out["candidates"][m][rows, :values.shape[1]] = values
        out["candidates"][m][rows, values.shape[1]:] = np.nan
    out["intercept"][rows] = bspec.intercept
    out["select"][rows] = bspec.select
    out["ok"][rows] = True
    if res.outliers:
        out.setdefault("outliers", {}).update(res.outliers)
    if res.influential:
        out.setdefault("influential", {}).update(res.influential)
