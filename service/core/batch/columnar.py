"""Long-format Arrow tables as the engine's flat arrays, and the one call that fits them.

::

    flatten_table(table, id="id", x="x", y="y", weight=None) -> FlatSeries
    fit_flat(flat, *, model=ModelSpec(), options=FitOptions(), detail="summary",
             workers=1) -> BatchResult

A long table has one row per point: the series id (strings or integers), x, y and
optionally a weight (inverse variance). Series are taken in the order of the first row
of each id; the points of a series keep their row order (Durbin-Watson reads them in
that order). A null number becomes NaN, a missing value as JSON ``null`` is: it follows
``options.missing``.

Grouping is free when the rows of each series are already together (a table written
series by series, or sorted by id): the runs of equal ids are the series, and x and y
are read in place; an id column sent run-end encoded (one id and a run end per series)
is taken as it is. Otherwise the rows are gathered by one stable sort of the id codes.

Every columnar path (the Arrow and Parquet bodies of ``/v1/batch``,
:func:`service.core.batch.arrow_stream.fit_arrow_stream`) fits through
:func:`fit_flat`, so a family fitted by another engine plugs in there.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pyarrow as pa
import pyarrow.compute as pc

from service.core.batch.curves import fit_many_curves
from service.core.batch.driver import fit_many
from service.core.batch.results import BatchResult
from service.core.errors import DataError
from service.core.spec import FitOptions, ModelSpec

_MODEL = ModelSpec()
_OPTIONS = FitOptions()
ID_FIX = "Send the id column as strings or integers, one non-null id on every row."


@dataclass(frozen=True, slots=True)
class FlatSeries:
    """Series held back to back: series ``i`` is ``x[offsets[i]:offsets[i + 1]]``.

    Attributes
    ----------
    ids : pyarrow.Array
        One id per series (string or int64), in order of first appearance.
    x, y : (N,) float64
    weights : (N,) float64 or None
    lengths : (G,) int64
    """

    ids: pa.Array
    x: np.ndarray
    y: np.ndarray
    weights: np.ndarray | None
    lengths: np.ndarray

    def __len__(self) -> int:
        return int(self.lengths.size)

    @property
    def total_points(self) -> int:
        return int(self.x.size)

    def select(self, keep: np.ndarray) -> FlatSeries:
        """The series where ``keep`` (a (G,) bool mask) is True, with their points only."""
        points = np.repeat(keep, self.lengths)
        return FlatSeries(self.ids.filter(pa.array(keep)), self.x[points], self.y[points],
                          None if self.weights is None else self.weights[points],
                          self.lengths[keep])


def flatten_table(table: pa.Table, id: str = "id", x: str = "x",  # noqa: A002
                  y: str = "y", weight: str | None = None) -> FlatSeries:
    """Group a long-format table into flat arrays, one series per id.

    Parameters
    ----------
    table : pyarrow.Table
        Columns ``id`` (strings, or integers; dictionary-encoded is fine), ``x``, ``y``
        and optionally ``weight`` (integers or floats; nulls are missing values).
    id, x, y, weight : str
        Column names.

    Returns
    -------
    FlatSeries

    Raises
    ------
    DataError
        A column is absent or of the wrong type, or an id is null; ``field`` names the
        column.
    """
    column = _column(table, id)
    xs, ys = _numbers(table, x), _numbers(table, y)
    ws = None if weight is None else _numbers(table, weight)
    runs = _distinct_runs(column, id) if pa.types.is_run_end_encoded(column.type) else None
    if runs is not None:                 # sent run-end encoded, one run per series
        return FlatSeries(runs[0], xs, ys, ws, runs[1])
    ids = _ids(column, id)
    if len(ids) == 0:
        return FlatSeries(ids, xs, ys, ws, np.zeros(0, dtype=np.int64))
    runs = pc.run_end_encode(ids)
    run_values = runs.values
    if len(pc.unique(run_values)) == len(run_values):   # each series' rows are together
        ends = runs.run_ends.to_numpy().astype(np.int64)
        lengths = np.diff(ends, prepend=0)
        return FlatSeries(run_values, xs, ys, ws, lengths)
    encoded = pc.dictionary_encode(ids)                 # codes in order of first appearance
    codes = encoded.indices.to_numpy()
    order = np.argsort(codes, kind="stable")
    lengths = np.bincount(codes, minlength=len(encoded.dictionary)).astype(np.int64)
    return FlatSeries(encoded.dictionary, xs[order], ys[order],
                      None if ws is None else ws[order], lengths)


def fit_flat(flat: FlatSeries, *, model: ModelSpec = _MODEL, options: FitOptions = _OPTIONS,
             detail: str = "summary", workers: int = 1) -> BatchResult:
    """Fit every series of ``flat`` with one shared model; one result row per series.

    The single entry point of the columnar paths (see the module docstring):
    :func:`service.core.batch.driver.fit_many`, or
    :func:`service.core.batch.curves.fit_many_curves` for a nonlinear model.
    """
    if model.family != "polynomial":  # nonlinear families: a CurveBatchResult
        return fit_many_curves(flat.x, flat.y, flat.lengths, flat.weights, model=model,
                               options=options, detail=detail, workers=workers)
    return fit_many(flat.x, flat.y, flat.lengths, flat.weights, model=model, options=options,
                    detail=detail, workers=workers)


def _distinct_runs(column: pa.ChunkedArray, name: str):
    """(ids, lengths) of a run-end encoded id column whose runs have distinct ids, else
    None (the column is then decoded and grouped like any other)."""
    if any(chunk.offset for chunk in column.chunks):
        return None
    values, lengths = [], []
    for chunk in column.chunks:
        ends = chunk.run_ends.to_numpy().astype(np.int64)
        values.append(chunk.values)
        lengths.append(np.diff(ends, prepend=0))
    if not values:
        return None
    ids = _ids(pa.chunked_array(values, column.type.value_type), name)
    if len(pc.unique(ids)) != len(ids):
        return None
    return ids, np.concatenate(lengths)


def _column(table: pa.Table, name: str) -> pa.ChunkedArray:
    if name not in table.column_names:
        raise DataError(f"The table has no column {name!r} (it has "
                        f"{', '.join(map(repr, table.column_names)) or 'none'}).",
                        field=name, fix=f"Add the column {name!r}, or rename yours to it.")
    return table.column(name)


def _ids(column: pa.ChunkedArray, name: str) -> pa.Array:
    kind = column.type
    if pa.types.is_run_end_encoded(kind):
        kind = kind.value_type
        column = pa.chunked_array([pc.run_end_decode(c) for c in column.chunks], kind)
    if pa.types.is_dictionary(kind):
        kind = kind.value_type
        column = pc.cast(column, kind)
    if pa.types.is_integer(kind):
        try:
            column = pc.cast(column, pa.int64())
        except pa.ArrowInvalid:
            raise DataError("An id is beyond the 64-bit integer range.", field=name,
                            fix=ID_FIX) from None
    elif pa.types.is_string(kind) or pa.types.is_large_string(kind):
        column = pc.cast(column, pa.string()) if pa.types.is_large_string(kind) else column
    else:
        raise DataError(f"The ids are of type {kind}, not strings or integers.", field=name,
                        fix=ID_FIX)
    if column.null_count:
        row = pc.index(pc.is_null(column), True).as_py()
        raise DataError(f"Row {row} has no id (null).", field=name, fix=ID_FIX)
    return column.combine_chunks()


def _numbers(table: pa.Table, name: str) -> np.ndarray:
    column = _column(table, name)
    kind = column.type
    if not (pa.types.is_integer(kind) or pa.types.is_floating(kind) or pa.types.is_null(kind)
            or pa.types.is_decimal(kind)):
        raise DataError(f"The column {name!r} is of type {kind}, not numbers.", field=name,
                        fix=f"Send {name!r} as floats or integers (null for a missing value).")
    if kind != pa.float64():
        column = pc.cast(column, pa.float64())
    return column.to_numpy()   # nulls become NaN; one float64 chunk is read in place
