"""Long tables sent as Arrow, tidy tables back: the engine of :meth:`Client.batch_frame`.

Needs the ``arrow`` extra (``pip install "curvewise-client[arrow]"``: pyarrow and
pandas); the rest of the client never imports either.

The request body is an Arrow IPC stream of the columns ``id``, ``x``, ``y`` (and
``weight``), renamed from the caller's column names; the shared options travel in the
query string as ``?options=<JSON object>``. The answer, asked for with ``Accept:
application/vnd.apache.arrow.stream``, is one row per series with one scalar per cell
(see the service's docs/scaling.md): ``status``, ``n``, ``degree``, ``sigma``, ...,
``coef_0``, ``coef_1``, ... (the coefficient of ``x^k``), ``se_0``, ..., the residual
tests' p-values, ``flag_codes``, ``flag_severities``, ``severity``, ``error_code``,
``error_field``, ``error``. Integer columns are pandas' nullable ``Int64``; the counts
of the batch are in ``frame.attrs["summary"]``.
"""

from __future__ import annotations

import json
from collections.abc import Mapping
from typing import Any
from urllib.parse import quote

from curvewise_client.bodies import open_bounds
from curvewise_client.errors import CurvewiseError

ARROW_STREAM = "application/vnd.apache.arrow.stream"
SUMMARY_KEY = b"curvewise.summary"
_INSTALL = 'pip install "curvewise-client[arrow]"'


class TableInputError(CurvewiseError, ValueError):
    """The table given to :meth:`Client.batch_frame` cannot be sent as it is (a column is
    missing, or its values cannot become Arrow numbers or ids). Nothing was sent."""


def _pyarrow():
    try:
        import pandas  # noqa: F401 - the answer becomes a DataFrame
        import pyarrow
        import pyarrow.ipc  # noqa: F401 - the submodule used below
    except ImportError as exc:  # pragma: no cover - depends on the environment
        raise ImportError(f"Client.batch_frame needs pyarrow and pandas: {_INSTALL}") from exc
    return pyarrow


def _pandas_type(kind):
    pa = _pyarrow()
    if kind == pa.int64():
        import pandas

        return pandas.Int64Dtype()
    return None


def encode_long(data: Any, *, id: str = "id", x: str = "x", y: str = "y",  # noqa: A002
                weight: str | None = None) -> memoryview:
    """An Arrow IPC stream of ``data``'s columns ``id``, ``x``, ``y`` (and ``weight``),
    renamed to the names the service reads.

    ``data`` is a pandas DataFrame or a pyarrow Table (or RecordBatch).
    """
    pa = _pyarrow()
    wanted = [id, x, y] + ([weight] if weight is not None else [])
    names = ["id", "x", "y"] + (["weight"] if weight is not None else [])
    if len(set(wanted)) != len(wanted):
        raise TableInputError(f"id, x, y and weight must name different columns: {wanted}")
    available = list(getattr(data, "column_names", None) or getattr(data, "columns", []))
    missing = [name for name in wanted if name not in available]
    if missing:
        raise TableInputError(f"the table has no column {missing[0]!r} (it has "
                              f"{available[:20]}); pass id=, x=, y= (and weight=) with your "
                              "column names")
    try:
        if isinstance(data, (pa.Table, pa.RecordBatch)):
            table = pa.Table.from_batches([data]) if isinstance(data, pa.RecordBatch) else data
            table = table.select(wanted)
        elif hasattr(data, "iloc"):   # a pandas DataFrame
            table = pa.Table.from_pandas(data[wanted], preserve_index=False)
        else:
            raise TableInputError("batch_frame takes a pandas DataFrame or a pyarrow Table, "
                                  f"not {type(data).__name__}")
    except (pa.ArrowInvalid, pa.ArrowTypeError) as exc:
        raise TableInputError(f"the columns cannot be sent as Arrow: {exc}. ids must be "
                              "strings or integers; x, y and weight numbers (missing "
                              "values as NaN/None)") from exc
    table = _compact_ids(table.rename_columns(names).replace_schema_metadata(None))
    sink = pa.BufferOutputStream()
    with pa.ipc.new_stream(sink, table.schema) as writer:
        writer.write_table(table)
    return memoryview(sink.getvalue())   # sent as it is, no copy


def _compact_ids(table):
    """Run-end encode the ids when rows of a series mostly come together (one id and a
    run end per series instead of one id per row: about half the body for string ids)."""
    import pyarrow.compute as pc

    pa = _pyarrow()
    ids = table.column("id").combine_chunks()
    if pa.types.is_dictionary(ids.type) or pa.types.is_run_end_encoded(ids.type):
        return table
    if pa.types.is_large_string(ids.type):
        ids = ids.cast(pa.string())
    encoded = pc.run_end_encode(ids)
    if 2 * len(encoded.run_ends) > len(ids):   # rows interleaved: plain ids are smaller
        return table.set_column(0, "id", ids)
    return table.set_column(0, "id", encoded)


def options_query(model: Mapping[str, Any] | None, options: Mapping[str, Any] | None) -> str:
    """``?options=<URL-encoded JSON>`` for the shared options, or ``""`` for none."""
    shared = dict(options or {})
    if model is not None:
        if "model" in shared:
            raise TableInputError("give the model once: model=... or options={'model': ...}")
        shared["model"] = model
    if isinstance(shared.get("model"), Mapping):   # infinite bounds: none, as for JSON
        shared["model"] = open_bounds(dict(shared["model"]), "model")
    if not shared:
        return ""
    try:
        text = json.dumps(shared, separators=(",", ":"), allow_nan=False)
    except (TypeError, ValueError) as exc:
        raise TableInputError(f"options must be plain JSON values: {exc}") from exc
    return "?options=" + quote(text, safe="")


def decode_tidy(data: bytes, *, id: str = "id"):  # noqa: A002
    """The tidy pandas DataFrame of an Arrow answer, its id column named ``id``, the batch
    counts in ``attrs["summary"]``."""
    pa = _pyarrow()
    table = pa.ipc.open_stream(pa.py_buffer(data)).read_all()
    summary = json.loads((table.schema.metadata or {}).get(SUMMARY_KEY, b"{}"))
    if id != "id" and "id" in table.column_names:
        table = table.rename_columns([id if name == "id" else name
                                      for name in table.column_names])
    frame = table.to_pandas(types_mapper=_pandas_type)
    if id in frame.columns and str(frame[id].dtype) == "Int64" and not frame[id].hasnans:
        frame[id] = frame[id].astype("int64")    # ids are never missing: plain integers
    frame.attrs["summary"] = summary
    return frame
