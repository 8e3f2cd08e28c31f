"""A long Arrow stream of any length, fitted chunk by chunk in bounded memory.

::

    fit_arrow_stream(reader, id="id", x="x", y="y", weight=None, *, model=ModelSpec(),
                     options=FitOptions(), chunk_series=8192, workers=1)
        -> iterator of pyarrow.Table

``reader`` yields record batches (a ``pyarrow.RecordBatchReader`` of an IPC stream or
file, ``pyarrow.dataset.Dataset.to_batches()``, ``ParquetFile.iter_batches()``...). Rows
are gathered until about ``chunk_series`` series have arrived; that chunk is fitted
(:func:`service.core.batch.columnar.fit_flat`, the engine behind ``fit_frame``) and its
tidy result table (:mod:`service.core.batch.tidy`, the columns of ``fit_frame``) is
yielded before more rows are read. The last series of a chunk may go on in the next
record batch, so it waits for the next chunk. Memory is bounded by one chunk and its
results, not by the length of the stream.

The rows of each series must be together in the stream (written series by series, or
sorted by id), as a streaming reader cannot look ahead: within a chunk rows are grouped
by id anyway, but an id that comes back after its chunk was fitted starts a new row of
results.
"""

from __future__ import annotations

from collections.abc import Iterable, Iterator

import pyarrow as pa
import pyarrow.compute as pc

from service.core.batch.columnar import fit_flat, flatten_table
from service.core.batch.tidy import result_table
from service.core.spec import FitOptions, ModelSpec

_MODEL = ModelSpec()
_OPTIONS = FitOptions()


def fit_arrow_stream(reader: Iterable, id: str = "id", x: str = "x",  # noqa: A002
                     y: str = "y", weight: str | None = None, *, model: ModelSpec = _MODEL,
                     options: FitOptions = _OPTIONS, chunk_series: int = 8192,
                     workers: int = 1) -> Iterator[pa.Table]:
    """Fit the series of a long record-batch stream; yield one tidy table per chunk.

    Parameters
    ----------
    reader : iterable of pyarrow.RecordBatch (or Table)
        Long format, the rows of each series together.
    id, x, y, weight : str
        Column names (the result's id column is named ``id``).
    model, options : as for :func:`service.core.batch.frames.fit_frame`
    chunk_series : int
        Series per fitted chunk (memory and latency of the first results grow with it).
    workers : int
        Engine threads.

    Yields
    ------
    pyarrow.Table
        Tidy results of one chunk, one row per series, in stream order.
    """
    columns = [id, x, y] + ([weight] if weight else [])
    pending: list[pa.Table] = []
    runs = 0

    def fit(table: pa.Table) -> pa.Table:
        flat = flatten_table(table, id=id, x=x, y=y, weight=weight)
        result = fit_flat(flat, model=model, options=options, workers=workers)
        return result_table(result, flat.ids, model, id_name=id)

    for batch in reader:
        part = batch if isinstance(batch, pa.Table) else pa.Table.from_batches([batch])
        if part.num_rows == 0:
            continue
        part = part.select(columns)
        pending.append(part)
        runs += len(pc.run_end_encode(part.column(id).combine_chunks()).run_ends)
        if runs <= chunk_series:
            continue
        table = pa.concat_tables(pending)
        last = _last_run_start(table.column(id))
        if last == 0:            # one series so far: keep reading
            continue
        yield fit(table.slice(0, last))
        pending, runs = [table.slice(last)], 1
    if pending:
        table = pa.concat_tables(pending)
        if table.num_rows:
            yield fit(table)


def _last_run_start(ids: pa.ChunkedArray) -> int:
    """Row where the run of the last id begins (its series may continue further on)."""
    ends = pc.run_end_encode(ids.combine_chunks()).run_ends
    return int(ends[-2].as_py()) if len(ends) > 1 else 0
