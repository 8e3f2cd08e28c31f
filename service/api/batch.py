"""Views: fit many series (JSON, NDJSON streamed both ways, or an Arrow / Parquet table)."""

from __future__ import annotations

from flask import Response, current_app, request, stream_with_context
from flask_smorest import Blueprint, abort
from webargs import core

from schemas.batch import BatchOptionsSchema, BatchRequestSchema
from schemas.batch_series import SeriesSchema, load_plain_series
from schemas.batch_summary import BatchResponseSchema
from service.api.batch_arrow import (
    ARROW_FILE,
    ARROW_STREAM,
    COLUMNAR,
    PARQUET,
    columnar_batch,
    refuse_options_param,
)
from service.api.batch_job import BatchJob, gc_paused
from service.api.batch_stream import stream
from service.api.error_docs import error_responses
from service.api.parsing import PARSER
from service.http.errors import ServiceLimitError
from service.http.problems import ProblemKind, register_kind

blp = Blueprint("batch", __name__, description="Fit many series.")
NDJSON = "application/x-ndjson"
register_kind(ProblemKind(
    "batch_too_large", 413, "Batch too large",
    "a batch has more series than CURVEWISE_MAX_SERIES, or more points in all than "
    "CURVEWISE_MAX_TOTAL_POINTS",
    "split the batch into several requests, or raise the limit"))

_TABLE = {"type": "string", "format": "binary"}
_LONG = ("A long table, one row per point: id (strings or integers), x, y and optionally "
         "weight (inverse variance); nulls are missing values. Any row order across series; "
         "the points of a series keep their row order; series are answered in order of "
         "their first row. Shared options in the options query parameter.")
_DOC = {"requestBody": {"required": True, "content": {
    "application/json": {"schema": BatchRequestSchema},
    NDJSON: {"schema": SeriesSchema, "description": "One series object per line; an optional "
             "first line {\"options\": {...}} carries the shared options (as the JSON body "
             "without series)."},
    ARROW_STREAM: {"schema": _TABLE, "description": "Arrow IPC stream. " + _LONG},
    ARROW_FILE: {"schema": _TABLE, "description": "Arrow IPC file. " + _LONG},
    PARQUET: {"schema": _TABLE, "description": "Parquet file. " + _LONG}}},
    "parameters": [{"name": "options", "in": "query", "required": False,
                    "description": "Arrow and Parquet bodies only: the shared options (the "
                                   "JSON body without series) as one URL-encoded JSON object, "
                                   "e.g. options={\"model\": {\"max_degree\": 4}}. Default: "
                                   "all defaults.",
                    "content": {"application/json": {"schema": BatchOptionsSchema}}}],
    "responses": {"200": {"description": "Results in request order, then counts. With an "
                                         "NDJSON request: one result object per line, each "
                                         "with its line number, then {\"summary\": {...}}. "
                                         "With an Arrow or Parquet request and Accept: "
                                         f"{ARROW_STREAM}: an Arrow IPC stream, one row per "
                                         "series (status, n, degree, sigma, ..., coef_0.., "
                                         "se_0.., test p-values, flag_codes, "
                                         "flag_severities, severity, error_code, error_field, "
                                         "error; see docs/scaling.md), the counts in the "
                                         "schema metadata curvewise.summary.",
                          "content": {"application/json": {"schema": BatchResponseSchema},
                                      NDJSON: {"schema": BatchResponseSchema},
                                      ARROW_STREAM: {"schema": _TABLE}}}}}


def _too_large(message: str) -> ServiceLimitError:
    return ServiceLimitError(413, "batch_too_large", message, field="series")


ERRORS = {400: "Unparsable JSON body, or an unreadable Arrow or Parquet table "
               "(invalid_table).",
          413: "Body, number of series or total points over the limit (batch_too_large).",
          415: "Body sent as none of application/json, application/x-ndjson, "
               f"{ARROW_STREAM}, {ARROW_FILE}, {PARQUET}.",
          422: "Invalid shared options, also on the NDJSON options line or in the options "
               "query parameter; a table with a missing, unknown or mistyped column, or "
               "without a weight column under weighting known_sd (a bad series only gets an "
               "error result)."}
MEDIA_TYPES = ("application/json", NDJSON, *COLUMNAR)


_document_errors = error_responses(blp, ERRORS)


@blp.route("/v1/batch", methods=["POST"])
@blp.doc(**_DOC)
@_document_errors
def batch():
    """Fit many independent series; a bad series gets an error result, the rest are fitted."""
    settings = current_app.config["CURVEWISE"]
    if request.mimetype in COLUMNAR:
        return columnar_batch(request, settings, _too_large)
    refuse_options_param(request)
    if request.mimetype != NDJSON and not core.is_json(request.mimetype):
        got = request.mimetype or "no Content-Type"
        abort(415, message=f"/v1/batch reads a body sent as one of {', '.join(MEDIA_TYPES)} "
                           f"(got {got}). Send the Content-Type that matches the body.",
              errors={"_body": [f"Send Content-Type: one of {', '.join(MEDIA_TYPES)}."]},
              code="unsupported_media_type")
    if request.mimetype == NDJSON:
        lines = stream(request, settings)  # body and options line checked: problems come here
        # X-Accel-Buffering: a buffering proxy (nginx) passes the lines on as they come
        return Response(stream_with_context(lines), mimetype=NDJSON,
                        headers={"X-Accel-Buffering": "no"})
    with gc_paused():
        return _json_batch(settings)


def _json_batch(settings):
    envelope = PARSER.parse(BatchRequestSchema(), request, location="json")
    series = envelope["series"]
    if len(series) > settings.max_series:
        raise _too_large(f"The batch has {len(series)} series; the limit is "
                         f"{settings.max_series}. Split it into several requests.")
    if envelope["detail"] == "full" and len(series) > settings.max_full_series:
        # every full report is held until the JSON answer is written (~30 KB a series):
        # the bound keeps a request's memory flat; NDJSON streams them one by one instead
        raise _too_large(f"A JSON batch with detail \"full\" holds every report until it "
                         f"answers; {len(series)} series are over this server's limit of "
                         f"{settings.max_full_series}. Send them as NDJSON "
                         "(application/x-ndjson), which streams full reports, or ask for "
                         "detail \"summary\".")
    total = sum(len(s["x"]) for s in series if isinstance(s, dict) and isinstance(
        s.get("x"), list))
    if total > settings.max_total_points:
        raise _too_large(f"The batch has {total} points in all; the limit is "
                         f"{settings.max_total_points}. Split it into several requests.")
    job = BatchJob(envelope, settings)
    plain = load_plain_series(series, settings.max_points)
    if plain is not None:     # every series plain: checked and gathered in bulk
        results = job.plain_results(*plain)
    else:
        results = job.results([job.series(obj, i) for i, obj in enumerate(series)])
    return current_app.json.response({"results": results, "summary": job.counts})
