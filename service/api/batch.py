"""Views: fit many series (JSON, or NDJSON streamed both ways)."""

from __future__ import annotations

from flask import Response, current_app, request, stream_with_context
from flask_smorest import Blueprint

from schemas.batch import BatchRequestSchema, BatchResponseSchema, SeriesSchema, load_plain_series
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


def _too_large(message: str) -> ServiceLimitError:
    return ServiceLimitError(413, "batch_too_large", message, field="series")


ERRORS = {400: "Unparsable JSON body.",
          413: "Body, number of series or total points over the limit (batch_too_large).",
          415: "Body sent neither as application/json nor as application/x-ndjson.",
          422: "Invalid shared options, also on the NDJSON options line (a bad series only "
               "gets an error result)."}


_document_errors = error_responses(blp, ERRORS)


@blp.route("/v1/batch", methods=["POST"])
@blp.doc(**_DOC)
@_document_errors
def batch():
    """Fit many independent series; a bad series gets an error result, the rest are fitted."""
    settings = current_app.config["CURVEWISE"]
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
