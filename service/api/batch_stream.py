"""NDJSON form of ``/v1/batch``: read series line by line, stream one result per line.

Before any answer starts, the view spools the body (:func:`service.api.body.spool_body`:
bounded memory, 413 for a chunked body over the limit, 400 for broken framing) and reads the
first line: an options line ``{"options": {...}}`` that is not valid is a 422 problem, as in
the JSON form. Then series are fitted in chunks of :data:`STREAM_CHUNK` lines and answered
one line each, in line order.

Memory per request is bounded whatever the lines hold: the spool (8 MiB in RAM, the rest on
disk), the longest line, and at most :data:`STREAM_CHUNK` pending lines. A line that is not
JSON becomes an error line at once when no series waits before it (else with its chunk);
every non-blank line counts against ``CURVEWISE_MAX_SERIES``, so a stream of garbage is cut
at the limit like any other.

The answer always ends with the summary line. The compute deadline is checked between lines
and between chunks (never inside a compiled call); when it passes, or anything fails, the
stream ends with an error line for the first line not answered (503 ``timeout``, or 500)
and the summary, whose ``truncated_at_line`` says where to resume.
"""

from __future__ import annotations

import logging
from collections.abc import Iterator

import orjson
from flask import request
from flask_smorest import abort
from marshmallow import ValidationError

from schemas.batch import OptionsLineSchema
from service.api.batch_job import BatchJob, gc_paused
from service.api.body import spool_body
from service.api.parsing import BOM, non_json_number_hint
from service.core.interrupt import checkpoint
from service.http.errors import ServiceLimitError, flatten_errors, problem_body, timeout_message
from service.http.jsonio import dumps_bytes
from service.runtime.guard import ComputeTimeout, DeadlinePassed, deadline_of

STREAM_CHUNK = 2048  # lines fitted and answered together while streaming (bounds memory)
log = logging.getLogger("curvewise.errors")


def stream(request, settings) -> Iterator[bytes]:
    """Spool the body and check its options line (problems, before any answer); return the
    generator of answer lines, which closes the spool when it ends."""
    body = spool_body(request)
    try:
        lines = _numbered(_lines(body))
        job, first = _options(lines, settings)
    except BaseException:
        body.close()
        raise
    return _answer(body, _Stream(job, settings), first, lines)


def _options(lines, settings) -> tuple[BatchJob, tuple[int, bytes] | None]:
    """The job from the options line, or the defaults and the first line (a series)."""
    for line_no, raw in lines:
        if line_no == 1 and raw.startswith(BOM):
            raw = raw[len(BOM):]
        try:
            obj = orjson.loads(raw)
        except orjson.JSONDecodeError:
            obj = None
        if not (isinstance(obj, dict) and set(obj) == {"options"}):
            return BatchJob(OptionsLineSchema().load({}), settings), (line_no, raw)
        try:
            envelope = OptionsLineSchema().load(obj["options"])
        except ValidationError as exc:
            abort(422, message=f"The options line (line {line_no}) is not valid; see errors "
                               "for each field and its fix. No series was read.",
                  errors=flatten_errors({"options": exc.messages}), code="validation_error")
        try:
            return BatchJob(envelope, settings), None
        except ServiceLimitError as exc:
            raise ServiceLimitError(exc.status, exc.code, exc.message,
                                    field=f"options.{exc.field}") from None
    return BatchJob(OptionsLineSchema().load({}), settings), None


def _answer(body, state: _Stream, first, lines) -> Iterator[bytes]:
    deadline = deadline_of(request.environ)
    if deadline is not None:
        deadline.checked_by_caller()  # checkpoints between lines and chunks stop this stream
    with body:
        try:
            if first is not None:
                yield from state.take(*first)
            for line_no, raw in lines:
                if state.done:
                    break
                yield from state.take(line_no, raw)
            yield from state.finish()
        except (Exception, DeadlinePassed) as exc:  # never GeneratorExit: the client left
            if deadline is not None:
                deadline.stand_down()
            yield from state.cut(exc, timed_out=isinstance(exc, ComputeTimeout) or (
                deadline is not None and deadline.expired))


class _Stream:
    """Lines read so far, the chunk waiting to be fitted, and the limits."""

    def __init__(self, job: BatchJob, settings) -> None:
        self.job, self.settings = job, settings
        self.pending: list[tuple[int, object, object]] = []  # (line, id, series or problem)
        self.series_pending = 0
        self.lines = self.points = 0
        self.done = False
        self.truncated_at: int | None = None
        self.current = 0  # the line being read
        self.fitting: list = []  # the chunk being fitted (not answered yet)

    def take(self, line_no: int, raw: bytes) -> Iterator[bytes]:
        """Answer lines due after reading one more non-blank line."""
        self.current = line_no
        checkpoint()
        self.lines += 1
        try:
            obj = orjson.loads(raw)
        except orjson.JSONDecodeError as exc:
            obj, item = None, (self.lines - 1, problem_body(   # id: its position, the default
                400, None, f"Line {line_no} is not valid JSON: {exc}."
                f"{non_json_number_hint(exc, raw)} Send one JSON object per line.",
                errors={"_body": ["Send one JSON object per line."]},
                code="invalid_json"))
        points = len(obj["x"]) if isinstance(obj, dict) and isinstance(obj.get("x"), list) else 0
        if (self.lines > self.settings.max_series
                or self.points + points > self.settings.max_total_points):
            yield from self._truncate(line_no)
            return
        self.points += points
        if isinstance(obj, dict) and set(obj) == {"options"}:   # only the first line's is read
            message = (f"Line {line_no} is an options line, but options are read only from the "
                       "first line: these were not applied. Move the line to the top.")
            item = (self.lines - 1, problem_body(422, None, message,
                                                 errors={"options": [message]},
                                                 code="validation_error"))
        elif obj is not None:
            item = self.job.series(obj, self.lines - 1)
        if isinstance(item[1], dict) and not self.series_pending:
            yield _line({"line": line_no, **self.job.error_results([item])[0]})
            return
        self.pending.append((line_no, *item))
        self.series_pending += not isinstance(item[1], dict)
        if len(self.pending) >= STREAM_CHUNK:
            yield from self._flush()

    def finish(self) -> Iterator[bytes]:
        """The last chunk, then the summary."""
        yield from self._flush()
        summary = dict(self.job.counts)
        if self.truncated_at is not None:
            summary["truncated_at_line"] = self.truncated_at
        yield _line({"summary": summary})

    def _truncate(self, line_no: int) -> Iterator[bytes]:
        yield from self._flush()
        self.done, self.truncated_at = True, line_no
        yield _line({"line": line_no, "status": "error", "error": problem_body(
            413, None, f"The stream passed this server's limit of {self.settings.max_series} "
            f"lines or {self.settings.max_total_points} points; line {line_no} and the rest "
            "were not read. Send them in another request.", code="batch_too_large")})

    def cut(self, error: BaseException, *, timed_out: bool) -> Iterator[bytes]:
        """End the answer early: an error line for the first line not answered, then the
        summary with ``truncated_at_line`` (that line and the rest were not answered)."""
        waiting = self.fitting or self.pending
        line_no = waiting[0][0] if waiting else self.current
        if timed_out:
            message = timeout_message(self.settings.request_timeout)
            problem = problem_body(503, None, message, errors={"_body": [message]},
                                   code="timeout")
        else:
            log.error("NDJSON batch stopped at line %s", line_no, exc_info=error)
            problem = problem_body(500, None, "An unexpected error occurred; this is a bug. "
                                   f"Line {line_no} and the rest were not answered.",
                                   code="internal_error")
        yield _line({"line": line_no, "status": "error", "error": problem})
        yield _line({"summary": {**self.job.counts, "truncated_at_line": line_no}})

    def _flush(self) -> Iterator[bytes]:
        pending, self.pending, self.series_pending = self.pending, [], 0
        if not pending:
            return
        self.fitting = pending
        with gc_paused():
            results = self.job.results([(ident, item) for _, ident, item in pending])
        self.fitting = []
        for (line_no, _, _), result in zip(pending, results, strict=True):
            yield _line({"line": line_no, **result})


def _numbered(lines) -> Iterator[tuple[int, bytes]]:
    """(line number, bytes) of the non-blank lines."""
    for line_no, raw in enumerate(lines, start=1):
        if raw.strip():
            yield line_no, raw


def _lines(stream, size: int = 1 << 16) -> Iterator[bytes]:
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


def _line(obj) -> bytes:
    return dumps_bytes(obj) + b"\n"
