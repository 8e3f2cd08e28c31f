"""NDJSON form of ``/v1/batch``: read series line by line, stream one result per line.

The request body is spooled first by the view (bounded memory; :mod:`service.api.body`
answers a body over the limit or badly framed before any line), then fitted in chunks of
:data:`STREAM_CHUNK` series; an optional first line ``{"options": {...}}``
carries the shared options.
"""

from __future__ import annotations

import orjson
from marshmallow import ValidationError

from schemas.batch import OptionsLineSchema
from service.api.batch_job import BatchJob, gc_paused
from service.api.body import spool_body
from service.http.errors import ServiceLimitError, flatten_errors, problem_body
from service.http.jsonio import dumps_bytes

STREAM_CHUNK = 2048  # series fitted together while streaming (bounds memory)


def stream(request, settings):
    """Spool the body (problems for its size and framing come here, before any answer), then
    return the generator fitting its series chunk by chunk, one result per line."""
    body = spool_body(request)
    return _answer(settings, body)


def _answer(settings, body):
    with body:
        yield from _stream_lines(settings, body)


def _stream_lines(settings, body):
    """Read series line by line, fit them chunk by chunk, write one result per line."""
    job, pending, n_series, n_points, line_no = None, [], 0, 0, 0
    for raw in _lines(body):
        line_no += 1
        if not raw.strip():
            continue
        try:
            obj = orjson.loads(raw)
        except orjson.JSONDecodeError as exc:
            pending.append((line_no, None, problem_body(
                400, None, f"Line {line_no} is not valid JSON: {exc}. Send one JSON object "
                "per line.", errors={"_body": ["Send one JSON object per line."]},
                code="invalid_json")))
            continue
        if job is None:
            if isinstance(obj, dict) and set(obj) == {"options"}:
                try:
                    job = BatchJob(OptionsLineSchema().load(obj["options"]), settings)
                except ValidationError as exc:
                    yield _line({"line": line_no, "status": "error", "error": problem_body(
                        422, None, "The options line is not valid.",
                        errors=flatten_errors({"options": exc.messages}),
                        code="validation_error")})
                    return
                except ServiceLimitError as exc:
                    yield _line({"line": line_no, "status": "error", "error": problem_body(
                        exc.status, None, exc.message, errors={f"options.{exc.field}":
                                                               [exc.message]}, code=exc.code)})
                    return
                continue
            job = BatchJob(OptionsLineSchema().load({}), settings)
        n_series += 1
        n_points += len(obj["x"]) if isinstance(obj, dict) and isinstance(obj.get("x"),
                                                                          list) else 0
        if n_series > settings.max_series or n_points > settings.max_total_points:
            yield from _flush(job, pending)
            yield _line({"line": line_no, "status": "error", "error": problem_body(
                413, None, f"The stream passed this server's limit of {settings.max_series} "
                f"series or {settings.max_total_points} points; line {line_no} and the rest "
                "were not read. Send them in another request.", code="batch_too_large")})
            yield _line({"summary": {**job.counts, "truncated_at_line": line_no}})
            return
        ident, item = job.series(obj, n_series - 1)
        pending.append((line_no, ident, item))
        if len(pending) >= STREAM_CHUNK:
            yield from _flush(job, pending)
            pending = []
    job = job or BatchJob(OptionsLineSchema().load({}), settings)
    yield from _flush(job, pending)
    yield _line({"summary": job.counts})


def _lines(stream, size: int = 1 << 16):
    """Lines of a byte stream, read in blocks (iterating the raw WSGI stream reads a byte
    at a time). Memory: one block plus the longest line; long lines are joined once."""
    pieces: list[bytes] = []
    while True:
        block = stream.read(size)
        if not block:
            break
        start = 0
        while True:
            end = block.find(b"\n", start)
            if end < 0:
                pieces.append(block[start:])
                break
            pieces.append(block[start:end])
            yield b"".join(pieces)
            pieces = []
            start = end + 1
    tail = b"".join(pieces)
    if tail:
        yield tail


def _flush(job: BatchJob, pending):
    if not pending:
        return
    with gc_paused():
        results = job.results([(ident, item) for _, ident, item in pending])
    for (line_no, _, _), result in zip(pending, results, strict=True):
        yield _line({"line": line_no, **result})


def _line(obj) -> bytes:
    return dumps_bytes(obj) + b"\n"
