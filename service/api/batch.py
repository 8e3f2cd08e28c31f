"""Views: fit many series (JSON, or NDJSON streamed both ways)."""

from __future__ import annotations

import gc
import tempfile
from contextlib import contextmanager
from http import HTTPStatus

import numpy as np
import orjson
from flask import Response, current_app, request, stream_with_context
from flask_smorest import Blueprint
from marshmallow import ValidationError

from schemas.batch import (
    BatchRequestSchema,
    BatchResponseSchema,
    OptionsLineSchema,
    SeriesSchema,
    load_series,
    summary_rows,
)
from service.api.parsing import PARSER
from service.core.batch import fit_batch
from service.core.design import term_names
from service.core.spec import FitOptions
from service.errors import ServiceLimitError, fit_error_body, flatten_errors, problem_body
from service.jsonio import dumps_bytes
from service.problems import ProblemKind, register_kind
from service.reporting import fit_response
from service.requests import grid_spec, model_spec

blp = Blueprint("batch", __name__, description="Fit many series.")
NDJSON = "application/x-ndjson"
STREAM_CHUNK = 2048  # series fitted together while streaming (bounds memory)
SPOOL_RAM_BYTES = 8 << 20  # NDJSON request bodies beyond this wait on disk, not in memory
FULL_INCLUDE = ("coefficients", "anova", "statistics", "selection", "diagnostics",
                "fitted_model")
register_kind(ProblemKind(
    "batch_too_large", 413, "Batch too large",
    "a batch has more series than CURVEWISE_MAX_SERIES, or more points in all than "
    "CURVEWISE_MAX_TOTAL_POINTS",
    "split the batch into several requests, or raise the limit"))

_DOC = {"requestBody": {"required": True, "content": {
    "application/json": {"schema": BatchRequestSchema},
    NDJSON: {"schema": SeriesSchema, "description": "One series object per line; an optional "
             "first line {\"options\": {...}} carries the shared options (as the JSON body "
             "without series)."}}},
    "responses": {"200": {"description": "Results in request order, then counts. With an "
                                         "NDJSON request: one result object per line, each "
                                         "with its line number, then {\"summary\": {...}}.",
                          "content": {"application/json": {"schema": BatchResponseSchema},
                                      NDJSON: {"schema": BatchResponseSchema}}}}}


class _Job:
    """Shared options of one batch request, checked against this server's limits."""

    def __init__(self, envelope: dict, settings):
        self.settings = settings
        self.detail = envelope["detail"]
        self.model = model_spec(envelope["model"])
        _check_degree(envelope["model"], settings, "model")
        include = envelope.get("include") or FULL_INCLUDE
        self.include = tuple(include)
        grid = envelope.get("grid")
        self.options = FitOptions(
            level=envelope["level"], missing=envelope["missing"],
            grid=grid_spec(grid) if grid is not None else None,
            include=frozenset(include) | ({"grid"} if grid is not None else set()),
            max_grid_points=settings.max_grid_points)
        self.counts = {"ok": 0, "error": 0, "flagged": 0}

    def results(self, items):
        """``items``: (id, series tuple or error body). Returns result dicts in order."""
        fit_idx = [i for i, (_, s) in enumerate(items) if isinstance(s, tuple)]
        batch = fit_batch([items[i][1] for i in fit_idx], model=self.model,
                          models=[items[i][1][3] for i in fit_idx], options=self.options,
                          detail=self.detail)
        ok_rows = np.flatnonzero(batch.ok).tolist()
        bodies = dict(zip(ok_rows, self._fits(batch, ok_rows), strict=True))
        out = []
        pos = {i: j for j, i in enumerate(fit_idx)}
        for i, (ident, series) in enumerate(items):
            j = pos.get(i)
            if j is None:
                out.append({"id": ident, "status": "error", "error": series})
            elif j in bodies:
                fit = bodies[j]
                self.counts["flagged"] += bool(fit.get("flags"))
                out.append({"id": ident, "status": "ok", "fit": fit})
            else:
                out.append({"id": ident, "status": "error",
                            "error": fit_error_body(batch.errors[j])})
        self.counts["ok"] += len(bodies)
        self.counts["error"] += len(items) - len(bodies)
        return out

    def _fits(self, batch, rows):
        if self.detail == "full":
            return [fit_response(batch.reports[j], self.include) for j in rows]
        return summary_rows(batch, rows, term_names)

    def series(self, obj, position: int):
        """(id, (x, y, w, ModelSpec|None)) or (id, problem body) for one series object."""
        ident = obj.get("id", position) if isinstance(obj, dict) else position
        try:
            ident, x, y, w, model = load_series(obj, position)
        except ValidationError as exc:
            return ident, problem_body(422, None, "This series is not valid; see errors for "
                                       "each field and its fix.",
                                       errors=flatten_errors(exc.messages),
                                       code="validation_error")
        if x.size > self.settings.max_points:
            return ident, problem_body(413, None, f"The series has {x.size} points; the limit "
                                       f"is {self.settings.max_points}. Split the series.",
                                       errors={"x": ["Too many points."]},
                                       code="too_many_points")
        if model is not None:
            try:
                _check_degree(model, self.settings, "model")
            except ServiceLimitError as exc:
                return ident, problem_body(exc.status, None, exc.message,
                                           errors={exc.field: [exc.message]}, code=exc.code)
            model = model_spec(model)
        return ident, (x, y, w, model)


@contextmanager
def _gc_paused():
    """Pause the cyclic garbage collector while many small result objects are built.

    A batch builds hundreds of thousands of lists and dicts, none of them in
    reference cycles; each automatic collection would walk all of them (and the
    decoded request) again. Reference counting still frees them; collection
    resumes afterwards.
    """
    was_enabled = gc.isenabled()
    gc.disable()
    try:
        yield
    finally:
        if was_enabled:
            gc.enable()


def _check_degree(model: dict, settings, prefix: str) -> None:
    for name in ("degree", "max_degree"):
        value = model.get(name)
        if value is not None and value > settings.max_degree:
            raise ServiceLimitError(422, "limit_exceeded",
                                    f"Degree {value} is over this server's limit of "
                                    f"{settings.max_degree}. Ask for a lower degree.",
                                    field=f"{prefix}.{name}")


def _too_large(message: str) -> ServiceLimitError:
    return ServiceLimitError(413, "batch_too_large", message, field="series")


ERRORS = {400: "Unparsable JSON body.",
          413: "Body, number of series or total points over the limit (batch_too_large).",
          415: "Body sent neither as application/json nor as application/x-ndjson.",
          422: "Invalid shared options (a bad series only gets an error result)."}


def _document_errors(view):
    for status, description in ERRORS.items():
        view = blp.alt_response(status, description=description,
                                response=HTTPStatus(status).name)(view)
    return view


@blp.route("/v1/batch", methods=["POST"])
@blp.doc(**_DOC)
@_document_errors
def batch():
    """Fit many independent series; a bad series gets an error result, the rest are fitted."""
    settings = current_app.config["CURVEWISE"]
    if request.mimetype == NDJSON:
        # X-Accel-Buffering: a buffering proxy (nginx) passes the lines on as they come
        return Response(stream_with_context(_stream(settings)), mimetype=NDJSON,
                        headers={"X-Accel-Buffering": "no"})
    with _gc_paused():
        return _json_batch(settings)


def _json_batch(settings):
    envelope = PARSER.parse(BatchRequestSchema(), request, location="json")
    series = envelope["series"]
    if len(series) > settings.max_series:
        raise _too_large(f"The batch has {len(series)} series; the limit is "
                         f"{settings.max_series}. Split it into several requests.")
    total = sum(len(s["x"]) for s in series if isinstance(s, dict) and isinstance(
        s.get("x"), list))
    if total > settings.max_total_points:
        raise _too_large(f"The batch has {total} points in all; the limit is "
                         f"{settings.max_total_points}. Split it into several requests.")
    job = _Job(envelope, settings)
    results = job.results([job.series(obj, i) for i, obj in enumerate(series)])
    return current_app.json.response({"results": results, "summary": job.counts})


def _spooled_body(size: int = 1 << 16):
    """The whole request body, copied to a spooled temporary file (RAM up to 8 MiB, then disk).

    Most HTTP clients send the whole body before they read any of the response;
    answering while the body still arrives would fill both socket buffers and
    deadlock. Reading it first (bounded memory) and then streaming the results
    works with every client.
    """
    spool = tempfile.SpooledTemporaryFile(max_size=SPOOL_RAM_BYTES)
    while True:
        block = request.stream.read(size)
        if not block:
            break
        spool.write(block)
    spool.seek(0)
    return spool


def _stream(settings):
    """Spool the body, then fit its series chunk by chunk, one result per line."""
    with _spooled_body() as body:
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
                    job = _Job(OptionsLineSchema().load(obj["options"]), settings)
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
            job = _Job(OptionsLineSchema().load({}), settings)
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
    job = job or _Job(OptionsLineSchema().load({}), settings)
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


def _flush(job: _Job, pending):
    if not pending:
        return
    with _gc_paused():
        results = job.results([(ident, item) for _, ident, item in pending])
    for (line_no, _, _), result in zip(pending, results, strict=True):
        yield _line({"line": line_no, **result})


def _line(obj) -> bytes:
    return dumps_bytes(obj) + b"\n"

