"""Tidy batch results: one row per series, one scalar per cell, as Arrow or pandas.

::

    result_table(result, ids=None, model=ModelSpec(), id_name="id") -> pyarrow.Table
    table_frame(table) -> pandas.DataFrame
    summary_counts(table) -> dict

Columns, in this order (:func:`column_names`):

- ``id`` (when ids are given), ``status`` (``"ok"`` or ``"error"``);
- the scalars of :data:`RESULT_SCALARS` (``n``, ``degree``, ``sigma``..., the residual
  tests' p-values ``shapiro_wilk_p``, ``breusch_pagan_p``, ``durbin_watson_p``,
  ``lack_of_fit_p``, ``chi_square_fit_p`` (the goodness-of-fit test with weighting
  ``known_sd``; null otherwise), and the counts of outlying, influential and high-leverage points);
- ``coef_0`` ... ``coef_K`` and ``se_0`` ... ``se_K``: the coefficient of ``x^k`` (raw x,
  after ``transform_x``) and its standard error, ``K`` the model's largest degree; null
  where ``x^k`` is not in that row's model (above its degree, or ``coef_0`` without an
  intercept);
- ``flag_codes``: the trust flag codes, ``;``-joined in the order ``/v1/fit`` lists them
  (``""`` without flags); ``flag_severities``: their severities in the same order;
  ``severity``: the most severe (``serious``, ``caution``, ``info``, or ``none``);
- ``error_code``, ``error_field``, ``error`` (message and fix) on error rows.

Undefined numbers are null (NaN in pandas); on an error row everything but ``id``,
``status`` and the error columns is null. Integer columns become pandas' nullable
``Int64``. No cell holds a list, tuple or dict, and no column is named ``flags`` (a
pandas DataFrame attribute).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pyarrow as pa
import pyarrow.compute as pc

from service.core.batch.curves_frames import curve_result_table
from service.core.batch.curves_results import CurveBatchResult
from service.core.batch.engine import FLAG_CODES
from service.core.batch.results import BatchResult
from service.core.spec import ModelSpec

_MODEL = ModelSpec()
RESULT_SCALARS = ("n", "degree", "df_residual", "sigma", "r_squared", "adj_r_squared", "rss",
                  "aic", "aicc", "bic", "press", "shapiro_wilk_p", "breusch_pagan_p",
                  "durbin_watson", "durbin_watson_p", "lack_of_fit_p", "chi_square_fit_p",
                  "n_outliers", "n_influential", "n_high_leverage")
FLAG_COLUMNS = ("flag_codes", "flag_severities", "severity")
ERROR_COLUMNS = ("error_code", "error_field", "error")
WORST_FIRST = ("serious", "caution", "info")
_LEVEL_BITS = 2 * len(FLAG_CODES)


def top_degree(model: ModelSpec) -> int:
    """The largest degree a row of ``model`` can have (the last ``coef_k`` column)."""
    if model.degree is not None:
        return int(model.degree)
    return int(model.max_degree or max(3, model.min_degree))


def column_names(model: ModelSpec = _MODEL, id_name: str | None = "id") -> list[str]:
    """The tidy columns for ``model``, in order."""
    powers = range(top_degree(model) + 1)
    return ([id_name] if id_name else []) + ["status", *RESULT_SCALARS,
                                             *(f"coef_{k}" for k in powers),
                                             *(f"se_{k}" for k in powers),
                                             *FLAG_COLUMNS, *ERROR_COLUMNS]


def result_table(result: BatchResult, ids=None, model: ModelSpec = _MODEL,
                 id_name: str = "id") -> pa.Table:
    """The tidy table of a columnar :class:`BatchResult` (see the module docstring).

    Parameters
    ----------
    result : BatchResult
    ids : pyarrow.Array, sequence or None
        One id per row; None leaves the id column out (the caller adds its own).
    model : ModelSpec
        The shared model: its largest degree sets the ``coef_k`` columns.
    """
    if isinstance(result, CurveBatchResult):   # nonlinear families: service.core.batch.curves
        return curve_result_table(result, ids, id_name)
    ok = np.asarray(result.ok, dtype=bool)
    bad = ~ok
    columns: dict[str, pa.Array] = {}
    if ids is not None:
        columns[id_name] = ids if isinstance(ids, pa.Array) else pa.array(ids)
    columns["status"] = pc.if_else(pa.array(ok), "ok", "error")
    for name in RESULT_SCALARS:
        values = np.asarray(result.columns[name])
        if values.dtype.kind == "f":
            columns[name] = pa.array(values, pa.float64(), mask=bad | np.isnan(values))
        else:
            columns[name] = pa.array(values.astype(np.int64), pa.int64(), mask=bad)
    coef, se = _by_power(result, top_degree(model))
    for label, block in (("coef", coef), ("se", se)):
        for k in range(block.shape[1]):
            columns[f"{label}_{k}"] = pa.array(block[:, k], pa.float64(),
                                               mask=np.isnan(block[:, k]))
    columns.update(_flag_columns(result, ok))
    columns.update(_error_columns(result))
    return pa.table(columns)


def _by_power(result: BatchResult, top: int) -> tuple[np.ndarray, np.ndarray]:
    """Coefficients and standard errors as (G, top + 1) arrays indexed by power of x."""
    G = len(result)
    out = []
    degree = np.asarray(result.columns["degree"])
    intercept = np.asarray(result.intercept, dtype=bool)
    powers = np.arange(top + 1)
    for entries in (result.coefficients, result.std_errors):
        block = np.full((G, top + 1), np.nan)
        width = min(entries.shape[1], top + 1)
        block[intercept, :width] = entries[intercept, :width]
        block[~intercept, 1:width + 1] = entries[~intercept, :min(width, top)]
        outside = (powers[None, :] > degree[:, None]) | ~np.asarray(result.ok)[:, None]
        block[outside] = np.nan
        out.append(block)
    return out[0], out[1]


def _flag_columns(result: BatchResult, ok: np.ndarray) -> dict[str, pa.Array]:
    """Flag codes, severities and the worst severity, built once per distinct flag set."""
    masks = np.asarray(result.columns["flags"], dtype=np.int64)
    levels = np.asarray(result.columns["flag_levels"], dtype=np.int64)
    keys, inverse = np.unique(masks << _LEVEL_BITS | levels, return_inverse=True)
    codes, severities, worst = [], [], []
    for key in keys.tolist():
        pairs = result.flags_of(key >> _LEVEL_BITS, key & ((1 << _LEVEL_BITS) - 1))
        codes.append(";".join(code for code, _ in pairs))
        severities.append(";".join(level for _, level in pairs))
        found = {level for _, level in pairs}
        worst.append(next((s for s in WORST_FIRST if s in found), "none"))
    out = {}
    for name, per_key in zip(FLAG_COLUMNS, (codes, severities, worst), strict=True):
        values = np.asarray(per_key, dtype=object)[inverse.ravel()]
        out[name] = pa.array(values, pa.string(), mask=~ok)
    return out


def _error_columns(result: BatchResult) -> dict[str, pa.Array]:
    G = len(result)
    code = np.full(G, None, dtype=object)
    field = np.full(G, None, dtype=object)
    message = np.full(G, None, dtype=object)
    for row, error in result.errors.items():
        code[row], field[row] = error.code, error.field
        message[row] = error.message + (f" Fix: {error.fix}" if error.fix else "")
    return {"error_code": pa.array(code, pa.string()), "error_field": pa.array(field, pa.string()),
            "error": pa.array(message, pa.string())}


def error_rows(schema: pa.Schema, ids, codes, fields, messages, id_name: str = "id"
               ) -> pa.Table:
    """Rows of ``schema`` for series refused before fitting: id, status "error" and the
    error columns; every other cell null."""
    count = len(codes)
    given = {id_name: pa.array(ids, schema.field(id_name).type),
             "status": pa.array(["error"] * count, pa.string()),
             "error_code": pa.array(codes, pa.string()),
             "error_field": pa.array(fields, pa.string()),
             "error": pa.array(messages, pa.string())}
    return pa.table([given.get(f.name, pa.nulls(count, f.type)) for f in schema], schema=schema)


def summary_counts(table: pa.Table) -> dict[str, int]:
    """Counts as in the JSON batch summary: ok, error, flagged (serious + caution), and the
    fitted series by their most severe flag."""
    status, worst = (_tally(table.column(name)) for name in ("status", "severity"))
    counts = {"ok": status.get("ok", 0), "error": status.get("error", 0)}
    by = {s: worst.get(s, 0) for s in WORST_FIRST}
    counts["flagged"] = by["serious"] + by["caution"]
    counts.update(by)
    return counts


def _tally(column: pa.ChunkedArray) -> dict[str, int]:
    return {entry["values"]: entry["counts"]
            for entry in column.drop_null().value_counts().to_pylist()}


def _pandas_type(kind: pa.DataType):
    return pd.Int64Dtype() if kind == pa.int64() else None


def table_frame(table: pa.Table) -> pd.DataFrame:
    """A tidy table as a DataFrame: floats float64 (null -> NaN), integers ``Int64``,
    strings pandas' default string type."""
    return table.to_pandas(types_mapper=_pandas_type)
