"""Long-format pandas entry point for nonlinear families: one tidy row per series out.

::

    fit_curve_frame(df, id="id", x="x", y="y", weight=None, *, model, options=FitOptions(),
                    workers=1) -> pandas.DataFrame

:func:`service.core.batch.frames.fit_frame` hands nonlinear models here. Series
are the groups of ``df[id]`` in order of first appearance, points in row order.
The result is tidy (one scalar per cell, Parquet-ready): ``id``, ``status``,
``est_<parameter>`` and ``se_<parameter>`` by parameter name, the columns of
:data:`~service.core.batch.curves_results.CURVE_SCALARS` (without the flag bit
masks), then as in :mod:`service.core.batch.tidy`: ``flag_codes`` (``;``-joined, ""
without flags), ``flag_severities`` (their severities in the same order), ``severity``
(the most severe: serious, caution, info, or none) and the error columns
``error_code``, ``error_field``, ``error`` (message and fix). Error rows hold missing
values elsewhere. :func:`curve_result_table` gives the same columns as an Arrow table
(the Arrow answers of ``/v1/batch``).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pyarrow as pa

from service.core.batch.columnar import ID_FIX
from service.core.batch.curves import fit_many_curves
from service.core.batch.curves_results import CURVE_SCALARS, CurveBatchResult
from service.core.errors import DataError
from service.core.spec import FitOptions

_OPTIONS = FitOptions()
SEVERITY_ORDER = ("serious", "caution", "info")
_HIDDEN = ("flags", "flag_levels")


def _numeric(series: pd.Series) -> np.ndarray:
    return pd.to_numeric(series, errors="coerce").to_numpy(dtype=float, na_value=np.nan)


def group_codes(column: pd.Series, name: str) -> tuple[np.ndarray, pd.Index]:
    """The series number of each row and the ids in order of first appearance.

    Raises
    ------
    DataError
        A row has no id (None, NaN): named with its row position, as the Arrow bodies are.
    """
    codes, uniques = pd.factorize(column, sort=False)
    if len(codes) and codes.min() < 0:
        row = int(np.flatnonzero(codes < 0)[0])
        raise DataError(f"Row {row} has no id (null).", field=name, fix=ID_FIX)
    return codes, uniques


def fit_curve_frame(df: pd.DataFrame, id: str = "id", x: str = "x", y: str = "y",  # noqa: A002
                    weight: str | None = None, *, model, options: FitOptions = _OPTIONS,
                    workers: int = 1) -> pd.DataFrame:
    """Fit one nonlinear curve (``model.family``) per ``id`` group of a long-format DataFrame.

    See the module docstring for the columns; :func:`~service.core.batch.curves.fit_many_curves`
    for the fitting.
    """
    codes, uniques = group_codes(df[id], id) if len(df) else (np.empty(0, int), [])
    order = np.argsort(codes, kind="stable")
    lengths = np.bincount(codes, minlength=len(uniques)) if len(df) else np.empty(0, int)
    xs = _numeric(df[x])[order]
    ys = _numeric(df[y])[order]
    ws = None if weight is None else _numeric(df[weight])[order]
    result = fit_many_curves(xs, ys, lengths, ws, model=model, options=options, workers=workers)
    return curve_result_frame(result, pd.Index(uniques, name=id))


def curve_result_frame(result: CurveBatchResult, ids) -> pd.DataFrame:
    """The columnar :class:`CurveBatchResult` as a tidy DataFrame (see :func:`fit_curve_frame`)."""
    G = len(result)
    ok = result.ok
    id_name = getattr(ids, "name", None) or "id"
    out = {id_name: np.asarray(ids, dtype=object) if G else np.empty(0, dtype=object),
           "status": np.where(ok, "ok", "error").astype(object)}
    for j, name in enumerate(result.parameter_names):
        out[f"est_{name}"] = result.estimates[:, j]
        out[f"se_{name}"] = result.std_errors[:, j]
    for name in CURVE_SCALARS:
        if name in _HIDDEN:
            continue
        col = result.columns[name]
        if col.dtype.kind == "f":
            out[name] = np.where(ok, col, np.nan)
        elif col.dtype.kind == "b":
            out[name] = pd.arrays.BooleanArray(col & ok, ~ok)
        elif col.dtype.kind in "iu":
            out[name] = pd.arrays.IntegerArray(np.where(ok, col, 0), ~ok)
        else:
            out[name] = pd.Series([v if k else None for v, k in zip(col, ok, strict=True)],
                                  dtype=object)
    flagged = [result.flag_severities(i) if ok[i] else () for i in range(G)]
    out["flag_codes"] = [";".join(code for code, _ in f) if ok[i] else None
                         for i, f in enumerate(flagged)]
    out["flag_severities"] = [";".join(level for _, level in f) if ok[i] else None
                              for i, f in enumerate(flagged)]
    out["severity"] = [_worst(f) if ok[i] else None for i, f in enumerate(flagged)]
    errors = result.errors
    out["error_code"] = [errors[i].code if i in errors else None for i in range(G)]
    out["error_field"] = [errors[i].field if i in errors else None for i in range(G)]
    out["error"] = [(errors[i].message + (f" Fix: {errors[i].fix}" if errors[i].fix else ""))
                    if i in errors else None for i in range(G)]
    frame = pd.DataFrame({k: (list(v) if isinstance(v, pd.Series) else v) for k, v in out.items()})
    for name in (id_name, "status", "termination", "start_strategy", "flag_codes",
                 "flag_severities", "severity", "error_code", "error_field", "error"):
        frame[name] = pd.Series(list(out[name]), dtype=object, index=frame.index)
    return frame


def curve_result_table(result: CurveBatchResult, ids=None, id_name: str = "id") -> pa.Table:
    """The tidy columns of :func:`curve_result_frame` as an Arrow table (no id column when
    ``ids`` is None)."""
    G = len(result)
    frame = curve_result_frame(result, pd.Index(np.zeros(G) if ids is None else
                                                (ids.to_pylist() if isinstance(ids, pa.Array)
                                                 else list(ids)), name=id_name))
    if ids is None:
        frame = frame.drop(columns=[id_name])
    table = pa.Table.from_pandas(frame, preserve_index=False)
    if isinstance(ids, pa.Array):
        table = table.set_column(0, id_name, ids)
    return table


def _worst(flags) -> str:
    found = {level for _, level in flags}
    return next((level for level in SEVERITY_ORDER if level in found), "none")
