"""Arrow and Parquet forms of ``/v1/batch``: a long table in, a tidy table (or JSON) out.

The body is one long-format table, a row per point: ``id`` (strings or integers), ``x``,
``y`` and optionally ``weight``, in any row order (the points of a series in their row
order). It is an Arrow IPC stream (:data:`ARROW_STREAM`), an Arrow IPC file
(:data:`ARROW_FILE`) or a Parquet file (:data:`PARQUET`). The shared options (the JSON
body without ``series``) travel in the query string as one JSON object,
``?options={"model": {"max_degree": 4}}`` (URL-encoded), checked by the same schema as the
JSON body: a bad one is a 422 naming ``options.<field>``.

The answer is JSON exactly as for the JSON body, or, when ``Accept`` prefers
:data:`ARROW_STREAM`, an Arrow IPC stream with one row per series and the tidy columns
of :mod:`service.core.batch.tidy` (errors as the columns error_code, error_field,
error). The counts of the JSON ``summary`` are in the schema metadata under
``curvewise.summary`` (a JSON object).

Limits as for JSON: ``CURVEWISE_MAX_BODY_BYTES`` (the body), ``MAX_TOTAL_POINTS`` (rows)
and ``MAX_SERIES`` (distinct ids) answer 413 ``batch_too_large``; a series over
``MAX_POINTS`` is an error row (``too_many_points``) and is not fitted.
"""

from __future__ import annotations

import numpy as np
import orjson
import pyarrow as pa
import pyarrow.parquet as pq
from flask import Response, current_app
from flask_smorest import abort
from marshmallow import ValidationError

from schemas.batch import BatchOptionsSchema
from service.api.batch_job import BatchJob, gc_paused
from service.api.body import blocks
from service.core.batch.columnar import FlatSeries, flatten_table
from service.core.batch.tidy import error_rows, result_table, summary_counts
from service.core.errors import FitError
from service.http.errors import ServiceLimitError, flatten_errors, problem_body
from service.http.problems import ProblemKind, register_kind
from service.runtime.observability import record_batch, record_fit_failure

ARROW_STREAM = "application/vnd.apache.arrow.stream"
ARROW_FILE = "application/vnd.apache.arrow.file"
PARQUET = "application/vnd.apache.parquet"
COLUMNAR = (ARROW_STREAM, ARROW_FILE, PARQUET)
JSON = "application/json"
OPTIONS_PARAM = "options"
COLUMNS = ("id", "x", "y", "weight")
READ_BLOCK = 4 << 20
_FORMATS = {ARROW_STREAM: "an Arrow IPC stream", ARROW_FILE: "an Arrow IPC file",
            PARQUET: "a Parquet file"}
register_kind(ProblemKind(
    "invalid_table", 400, "Unreadable table",
    "An Arrow or Parquet body of /v1/batch could not be read as its Content-Type says.",
    "Write the table with an Arrow or Parquet library (e.g. pyarrow.ipc.new_stream) and "
    "send the Content-Type that matches it."))


def columnar_batch(request, settings, too_large) -> Response:
    """Answer one Arrow or Parquet batch request; ``too_large(message)`` makes the 413."""
    envelope = _options(request)
    job = _job(envelope, settings)
    answer_arrow = wants_arrow(request)
    if answer_arrow and envelope["detail"] == "full":
        abort(422, message="An Arrow answer holds one row of numbers per series; "
                           "detail \"full\" reports are JSON documents. Ask for detail "
                           "\"summary\", or Accept: application/json.",
              errors={"options.detail": ["Use \"summary\" with an Arrow answer."]},
              code="validation_error")
    table = _read_table(request, settings.max_total_points, too_large)
    if job.known_sd and "weight" not in table.column_names:
        abort(422, message="options.weighting is \"known_sd\", which reads each point's "
                           "weight as 1/SD² of a known measurement error, but the table has "
                           "no weight column. Add a weight column (1/SD² for every point), "
                           "or use weighting \"relative\".",
              errors={"weight": ["Missing column: add weight = 1/SD² (weighting known_sd)."]},
              code="validation_error")
    flat = _flatten(table)
    if len(flat) > settings.max_series:
        raise too_large(f"The table has {len(flat)} series (distinct ids); the limit is "
                        f"{settings.max_series}. Split it into several requests.")
    if envelope["detail"] == "full" and len(flat) > settings.max_full_series:
        raise too_large(f"A batch with detail \"full\" holds every report until it answers; "
                        f"{len(flat)} series are over this server's limit of "
                        f"{settings.max_full_series}. Ask for detail \"summary\".")
    refused = flat.lengths > settings.max_points
    with gc_paused():
        if answer_arrow:
            return _arrow_answer(job, flat, refused, settings.max_points)
        return _json_answer(job, flat, refused, settings.max_points)


def wants_arrow(request) -> bool:
    """True when the request's Accept prefers an Arrow IPC stream over JSON."""
    return request.accept_mimetypes.best_match((JSON, ARROW_STREAM), default=JSON) \
        == ARROW_STREAM


def refuse_options_param(request) -> None:
    """The ``options`` query parameter belongs to Arrow and Parquet bodies only."""
    if OPTIONS_PARAM in request.args:
        abort(422, message="The options query parameter is for Arrow and Parquet bodies; "
                           "with a JSON body put the options in the body itself (NDJSON: "
                           "in the first line {\"options\": {...}}).",
              errors={OPTIONS_PARAM: ["Move these options into the body."]},
              code="validation_error")


def _options(request) -> dict:
    values = request.args.getlist(OPTIONS_PARAM)
    unknown = sorted(set(request.args) - {OPTIONS_PARAM})
    if unknown or len(values) > 1:
        errors = {name: ["Unknown query parameter: put shared options in options=<JSON>."]
                  for name in unknown}
        if len(values) > 1:
            errors[OPTIONS_PARAM] = ["Give options once, as one JSON object."]
        abort(422, message="The query string may hold one parameter, options (a JSON object "
                           "with the shared options).", errors=errors, code="validation_error")
    raw = values[0] if values else "{}"
    try:
        obj = orjson.loads(raw)
    except orjson.JSONDecodeError as exc:
        obj, problem = None, f"Not valid JSON: {exc}."
    else:
        problem = None if isinstance(obj, dict) else "Must be a JSON object."
    if problem is not None:
        abort(422, message=f"The options query parameter is not a JSON object ({problem}) "
                           "Send options={\"model\": {...}, ...}, URL-encoded.",
              errors={OPTIONS_PARAM: [problem]}, code="validation_error")
    try:
        return BatchOptionsSchema().load(obj)
    except ValidationError as exc:
        abort(422, message="The options query parameter is not valid; see errors for each "
                           "field and its fix.",
              errors=flatten_errors({OPTIONS_PARAM: exc.messages}), code="validation_error")


def _job(envelope: dict, settings) -> BatchJob:
    try:
        return BatchJob(envelope, settings)
    except ServiceLimitError as exc:
        raise ServiceLimitError(exc.status, exc.code, exc.message,
                                field=f"{OPTIONS_PARAM}.{exc.field}") from None


def _decode(kind: str, buffer: pa.Buffer, max_rows: int) -> pa.Table | None:
    """The table in ``buffer``, or None when it has more than ``max_rows`` rows."""
    if kind == PARQUET:
        parquet = pq.ParquetFile(buffer)
        return None if parquet.metadata.num_rows > max_rows else parquet.read()
    if kind == ARROW_FILE:
        reader = pa.ipc.open_file(buffer)
        batches = (reader.get_batch(i) for i in range(reader.num_record_batches))
    else:
        reader = pa.ipc.open_stream(buffer)
        batches = iter(reader)
    kept, rows = [], 0
    for batch in batches:
        rows += batch.num_rows
        if rows > max_rows:
            return None
        kept.append(batch)
    return pa.Table.from_batches(kept, schema=reader.schema)


def _read_table(request, max_rows: int, too_large) -> pa.Table:
    kind = request.mimetype
    data = b"".join(blocks(request, READ_BLOCK))   # a table is read whole: few large reads
    if not data:
        abort(400, message=f"The body is empty. Send {_FORMATS[kind]} with the columns "
                           "id, x, y (and weight).",
              errors={"_body": ["Send a table."]}, code="invalid_table")
    buffer = pa.py_buffer(data)
    try:
        # rows are counted as the table is read (a Parquet file's from its footer): a
        # compressed body over the row limit is refused before it is all decompressed
        table = _decode(kind, buffer, max_rows)
        if table is not None:
            table.validate(full=True)   # offsets and lengths checked before any value is read
    except (pa.ArrowException, OSError, ValueError) as exc:
        said = str(exc).strip().splitlines()[0][:200] if str(exc).strip() else type(exc).__name__
        abort(400, message=f"The body is not {_FORMATS[kind]} ({said}). Write it with an "
                           "Arrow or Parquet library, and send the Content-Type that matches "
                           "it (application/json for JSON).",
              errors={"_body": [f"Send {_FORMATS[kind]}."]}, code="invalid_table")
    if table is None:
        raise too_large(f"The table has more than {max_rows} rows (points), this server's "
                        "limit. Split it into several requests.")
    unknown = [name for name in table.column_names if name not in COLUMNS]
    if unknown:
        abort(422, message="The table has columns this endpoint does not read; send only "
                           "id, x, y and optionally weight.",
              errors={name: ["Unknown column. Remove it (or rename it to id, x, y or "
                             "weight)."] for name in unknown}, code="validation_error")
    return table


def _flatten(table: pa.Table) -> FlatSeries:
    weight = "weight" if "weight" in table.column_names else None
    try:
        return flatten_table(table, weight=weight)
    except FitError as exc:
        message = exc.message + (f" Fix: {exc.fix}" if exc.fix else "")
        abort(422, message=message, errors={exc.field or "_body": [message]},
              code="validation_error")


def _refusal(size: int, limit: int) -> str:
    return f"The series has {size} points; the limit is {limit}. Split the series."


def _json_answer(job: BatchJob, flat: FlatSeries, refused: np.ndarray, limit: int):
    ids = flat.ids.to_pylist()
    bodies = {int(i): problem_body(413, None, _refusal(int(flat.lengths[i]), limit),
                                   errors={"x": ["Too many points."]}, code="too_many_points")
              for i in np.flatnonzero(refused)}
    kept = flat.select(~refused) if bodies else flat
    results = job.flat_results(ids, kept, bodies)
    return current_app.json.response({"results": results, "summary": job.counts})


def _arrow_answer(job: BatchJob, flat: FlatSeries, refused: np.ndarray, limit: int):
    kept = flat.select(~refused) if refused.any() else flat
    table = result_table(job.fit_flat(kept), kept.ids, job.model)
    if refused.any():
        rows = np.flatnonzero(refused)
        extra = error_rows(table.schema, flat.ids.take(pa.array(rows)),
                           ["too_many_points"] * rows.size, ["x"] * rows.size,
                           [_refusal(int(flat.lengths[i]), limit) for i in rows])
        position = np.concatenate([np.flatnonzero(~refused), rows])
        table = pa.concat_tables([table, extra]).take(pa.array(np.argsort(position)))
    counts = summary_counts(table)
    record_batch(len(flat), counts["ok"], counts["error"])
    codes = table.column("error_code").drop_null().value_counts().to_pylist()
    for entry in codes:
        record_fit_failure(entry["values"], entry["counts"])
    table = table.replace_schema_metadata({"curvewise.summary": orjson.dumps(counts)})
    sink = pa.BufferOutputStream()
    with pa.ipc.new_stream(sink, table.schema) as writer:
        writer.write_table(table)
    return Response(sink.getvalue().to_pybytes(), mimetype=ARROW_STREAM)
