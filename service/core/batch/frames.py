"""Long-format pandas entry point: one row per point in, one row per series out.

::

    fit_frame(df, id="id", x="x", y="y", weight=None, *, model=ModelSpec(),
              options=FitOptions(), workers=1) -> pandas.DataFrame

Series are the groups of ``df[id]`` in order of first appearance; points keep
their row order within a series (Durbin-Watson reads them in that order).
Values that are not numbers become missing values and follow
``options.missing``. The result has one row per series, in that order, with
``status`` "ok" or "error"; error rows carry ``error_code``,
``error_field`` and ``error`` (message and fix) and NaN elsewhere. The columns are those
of :mod:`service.core.batch.tidy`, as the Arrow answer of ``/v1/batch`` has them.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from service.core.batch.curves_frames import fit_curve_frame, group_codes
from service.core.batch.driver import fit_many
from service.core.batch.results import BatchResult
from service.core.batch.tidy import RESULT_SCALARS, result_table, table_frame
from service.core.spec import FitOptions, ModelSpec

__all__ = ["RESULT_SCALARS", "fit_frame", "result_frame"]
_MODEL = ModelSpec()
_OPTIONS = FitOptions()


def _numeric(series: pd.Series) -> np.ndarray:
    return pd.to_numeric(series, errors="coerce").to_numpy(dtype=float, na_value=np.nan)


def fit_frame(df: pd.DataFrame, id: str = "id", x: str = "x", y: str = "y",  # noqa: A002
              weight: str | None = None, *, model: ModelSpec = _MODEL,
              options: FitOptions = _OPTIONS, workers: int = 1) -> pd.DataFrame:
    """Fit one curve (a polynomial, or the nonlinear family the model names) per ``id`` group
    of a long-format DataFrame (nonlinear families: :mod:`.curves_frames`).

    Parameters
    ----------
    df : pandas.DataFrame
        Columns ``id``, ``x``, ``y`` and optionally ``weight`` (inverse variances).
    id, x, y, weight : str
        Column names.
    model : ModelSpec
    options : FitOptions
        ``level``, ``missing`` and ``weighting`` apply (``"known_sd"``: the weights are
        1/SD² of known errors, and the ``chi_square_fit_p`` column is filled).
    workers : int
        Threads for the engine.

    Returns
    -------
    pandas.DataFrame
        Tidy, one scalar per cell (:mod:`service.core.batch.tidy`): ``id``, ``status``,
        the columns of :data:`RESULT_SCALARS`, ``coef_k`` and ``se_k`` (``k`` the power of
        x, up to the model's largest degree; NaN where ``x^k`` is not in a row's model),
        ``flag_codes`` and ``flag_severities`` (``;``-joined, same order), ``severity``
        (the most severe: serious, caution, info, or none), and ``error_code``,
        ``error_field``, ``error``.

    Raises
    ------
    DataError
        A row has no id (None or NaN in ``df[id]``), named by its position.
    """
    if model.family != "polynomial":  # nonlinear families: tidy per-parameter columns
        return fit_curve_frame(df, id, x, y, weight, model=model, options=options, workers=workers)
    codes, uniques = group_codes(df[id], id)
    order = np.argsort(codes, kind="stable")
    lengths = np.bincount(codes, minlength=len(uniques))
    xs = _numeric(df[x])[order]
    ys = _numeric(df[y])[order]
    ws = None if weight is None else _numeric(df[weight])[order]
    result = fit_many(xs, ys, lengths, ws, model=model, options=options, workers=workers)
    return result_frame(result, pd.Index(uniques, name=id), model)


def result_frame(result: BatchResult, ids, model: ModelSpec = _MODEL) -> pd.DataFrame:
    """The columnar :class:`BatchResult` as a tidy DataFrame (see :func:`fit_frame`)."""
    id_name = getattr(ids, "name", None) or "id"
    frame = table_frame(result_table(result, None, model))
    frame.insert(0, id_name, pd.Index(ids))
    return frame
