"""Long-format pandas entry point: one row per point in, one row per series out.

::

    fit_frame(df, id="id", x="x", y="y", weight=None, *, model=ModelSpec(),
              options=FitOptions(), workers=1) -> pandas.DataFrame

Series are the groups of ``df[id]`` in order of first appearance; points keep
their row order within a series (Durbin-Watson reads them in that order).
Values that are not numbers become missing values and follow
``options.missing``. The result has one row per series, in that order, with
``status`` "ok" or "error"; error rows carry ``error_code``,
``error_field`` and ``error`` (message and fix) and NaN elsewhere.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from service.core.batch.curves_frames import fit_curve_frame
from service.core.batch.driver import fit_many
from service.core.batch.results import BatchResult
from service.core.polynomial.design import term_names
from service.core.spec import FitOptions, ModelSpec

_MODEL = ModelSpec()
_OPTIONS = FitOptions()
RESULT_SCALARS = ("n", "degree", "df_residual", "sigma", "r_squared", "adj_r_squared", "rss",
                  "aic", "aicc", "bic", "press", "shapiro_wilk_p", "breusch_pagan_p",
                  "durbin_watson", "durbin_watson_p", "lack_of_fit_p", "n_outliers",
                  "n_influential", "n_high_leverage")
SEVERITY_ORDER = ("serious", "caution", "info")


def _numeric(series: pd.Series) -> np.ndarray:
    return pd.to_numeric(series, errors="coerce").to_numpy(dtype=float, na_value=np.nan)


def fit_frame(df: pd.DataFrame, id: str = "id", x: str = "x", y: str = "y",  # noqa: A002
              weight: str | None = None, *, model: ModelSpec = _MODEL,
              options: FitOptions = _OPTIONS, workers: int = 1) -> pd.DataFrame:
    """Fit one polynomial per ``id`` group of a long-format DataFrame.

    Parameters
    ----------
    df : pandas.DataFrame
        Columns ``id``, ``x``, ``y`` and optionally ``weight`` (inverse variances).
    id, x, y, weight : str
        Column names.
    model : ModelSpec
    options : FitOptions
        ``level`` and ``missing`` apply.
    workers : int
        Threads for the engine.

    Returns
    -------
    pandas.DataFrame
        One row per series: ``id``, ``status``, the columns of :data:`RESULT_SCALARS`,
        ``coef_<term>`` and ``se_<term>`` for every term up to the largest degree
        (NaN beyond a row's degree), ``flags`` (tuple of codes), ``flag_severities`` (their
        severities, in the same order), ``severity`` (the most severe: serious, caution,
        info, or none without flags; None on error rows), and the error columns.
    """
    if model.family != "polynomial":  # nonlinear families: tidy per-parameter columns
        return fit_curve_frame(df, id, x, y, weight, model=model, options=options, workers=workers)
    codes, uniques = pd.factorize(df[id], sort=False) if len(df) else (np.empty(0, int), [])
    order = np.argsort(codes, kind="stable")
    lengths = np.bincount(codes, minlength=len(uniques)) if len(df) else np.empty(0, int)
    xs = _numeric(df[x])[order]
    ys = _numeric(df[y])[order]
    ws = None if weight is None else _numeric(df[weight])[order]
    result = fit_many(xs, ys, lengths, ws, model=model, options=options, workers=workers)
    return result_frame(result, pd.Index(uniques, name=id), model)


def result_frame(result: BatchResult, ids, model: ModelSpec = _MODEL) -> pd.DataFrame:
    """The columnar :class:`BatchResult` as a DataFrame (see :func:`fit_frame`)."""
    G = len(result)
    id_name = getattr(ids, "name", None) or "id"
    out = {id_name: np.asarray(ids, dtype=object) if G else np.empty(0, dtype=object),
           "status": np.where(result.ok, "ok", "error").astype(object)}
    for name in RESULT_SCALARS:
        col = result.columns[name]
        if col.dtype.kind == "f":
            out[name] = np.where(result.ok, col, np.nan)
        else:
            out[name] = pd.arrays.IntegerArray(np.where(result.ok, col, 0), ~result.ok)
    top = model.degree if model.degree is not None else (model.max_degree or 3)
    terms = term_names(max(top, 0), model.intercept)
    width = min(len(terms), result.coefficients.shape[1])
    for j, term in enumerate(terms[:width]):
        out[f"coef_{term}"] = result.coefficients[:, j]
        out[f"se_{term}"] = result.std_errors[:, j]
    flagged = [result.flag_severities(i) if result.ok[i] else () for i in range(G)]
    out["flags"] = [tuple(code for code, _ in f) for f in flagged]
    out["flag_severities"] = [tuple(level for _, level in f) for f in flagged]
    out["severity"] = [_worst(f) if result.ok[i] else None for i, f in enumerate(flagged)]
    errors = result.errors
    out["error_code"] = [errors[i].code if i in errors else None for i in range(G)]
    out["error_field"] = [errors[i].field if i in errors else None for i in range(G)]
    out["error"] = [(errors[i].message + (f" Fix: {errors[i].fix}" if errors[i].fix else ""))
                    if i in errors else None for i in range(G)]
    frame = pd.DataFrame(out)
    for name in (id_name, "status", "flags", "flag_severities", "severity", "error_code",
                 "error_field", "error"):
        frame[name] = pd.Series(list(out[name]), dtype=object, index=frame.index)
    return frame


def _worst(flags) -> str:
    found = {level for _, level in flags}
    return next((level for level in SEVERITY_ORDER if level in found), "none")
