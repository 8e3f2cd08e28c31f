"""Metrics and logs: Prometheus /metrics (multi-worker safe), JSON logs with a request id.

Metrics (``prometheus_client``; in multiprocess mode under gunicorn):

- ``curvewise_http_requests_total{method, route, status}``
- ``curvewise_http_request_duration_seconds{method, route}`` (histogram)
- ``curvewise_http_requests_in_progress`` (gauge, summed over live workers)
- ``curvewise_fit_failures_total{reason}`` -- ``reason`` is :attr:`FitError.code` (or the
  problem code of a refused batch series, counted by the batch job)
- ``curvewise_batch_series`` (histogram of series per /v1/batch request)
- ``curvewise_batch_results_total{status}`` -- series answered ``ok`` / ``error`` in batches

Batch sizes and ok/error counts are read from the ``summary`` object that closes every
/v1/batch answer (the wire contract: last member of the JSON body, last line of an NDJSON
stream), so the batch views need no code for them; a streamed answer is counted when its last
line has gone out.

``route`` is the URL rule template (``/v1/fit``), never the raw path, so label cardinality stays
bounded; unmatched paths are counted as ``<unmatched>``.

Under several gunicorn workers every worker writes its samples to files in
``PROMETHEUS_MULTIPROC_DIR`` and /metrics merges them. That variable must be set before
``prometheus_client`` is first imported in the master, so this module imports it lazily:
``service.runtime.gunicorn_conf`` calls :func:`prepare_multiprocess_dir` in ``on_starting`` and
:func:`mark_worker_dead` in ``child_exit``.

Logs (:mod:`service.runtime.logs`): each request gets an id, echoed in ``X-Request-ID``
and stamped on every record written while it runs, and one JSON access line. Bodies are
never logged.
"""

from __future__ import annotations

import logging
import os
import shutil
import tempfile
import time
from functools import cache

import orjson
from flask import Flask, Response, g, request
from flask_smorest import Blueprint

from service.core.errors import FitError
from service.runtime.logs import (
    REQUEST_ID_HEADER,
    configure_logging,
    incoming_request_id,
    info_record,
)

_METHODS = frozenset({"GET", "HEAD", "POST", "PUT", "PATCH", "DELETE", "OPTIONS"})
MULTIPROC_ENV = "PROMETHEUS_MULTIPROC_DIR"
_OWNED_DIR_ENV = "CURVEWISE_OWNS_METRICS_DIR"
LATENCY_BUCKETS = (0.001, 0.0025, 0.005, 0.01, 0.025, 0.05, 0.1, 0.25, 0.5, 1.0, 2.5, 5.0,
                   10.0, 30.0, 60.0, 120.0)
BATCH_BUCKETS = (1, 2, 5, 10, 20, 50, 100, 200, 500, 1_000, 2_000, 5_000, 10_000, 20_000,
                 50_000, 100_000)
access_log = logging.getLogger("curvewise.access")


class _Metrics:
    """The metric objects, created once per process on first use."""

    def __init__(self) -> None:
        from prometheus_client import Counter, Gauge, Histogram

        self.requests = Counter("curvewise_http_requests", "HTTP requests answered.",
                                ("method", "route", "status"))
        self.latency = Histogram("curvewise_http_request_duration_seconds",
                                 "Time from request start to response (body streaming excluded).",
                                 ("method", "route"), buckets=LATENCY_BUCKETS)
        self.in_progress = Gauge("curvewise_http_requests_in_progress",
                                 "Requests being handled now.", multiprocess_mode="livesum")
        self.fit_failures = Counter("curvewise_fit_failures",
                                    "Inputs the core could not fit, by reason code.", ("reason",))
        self.batch_series = Histogram("curvewise_batch_series", "Series per batch request.",
                                      buckets=BATCH_BUCKETS)
        self.batch_results = Counter("curvewise_batch_results",
                                     "Series answered in batch requests, by status.", ("status",))
        self._children: dict = {}


    def request_children(self, method: str, route: str, status: int):
        """(request counter, latency histogram) children for these labels, cached."""
        key = (method, route, status)
        children = self._children.get(key)
        if children is None:
            children = (self.requests.labels(method=method, route=route, status=str(status)),
                        self.latency.labels(method=method, route=route))
            self._children[key] = children
        return children


@cache
def metrics() -> _Metrics:
    """This process's metric objects."""
    return _Metrics()


def record_fit_failure(code: str, count: int = 1) -> None:
    """Count ``count`` inputs refused for reason ``code`` (e.g. failed series in a batch)."""
    metrics().fit_failures.labels(reason=code or "unfittable_input").inc(count)


def record_batch(series: int, ok: int | None = None, error: int | None = None) -> None:
    """Count one batch request of ``series`` series (``ok`` + ``error`` of them, if known)."""
    m = metrics()
    m.batch_series.observe(series)
    if ok is not None:
        m.batch_results.labels(status="ok").inc(ok)
    if error is not None:
        m.batch_results.labels(status="error").inc(error)


BATCH_ROUTE = "/v1/batch"
_SUMMARY_KEY = b'"summary"'


def batch_summary(tail: bytes) -> dict | None:
    """The ``summary`` object at the end of a batch answer (JSON or NDJSON), or None."""
    at = tail.rfind(_SUMMARY_KEY)
    if at < 0:
        return None
    start = tail.find(b"{", at)
    end = tail.find(b"}", start)
    try:
        summary = orjson.loads(tail[start:end + 1])
    except orjson.JSONDecodeError:
        return None
    if not isinstance(summary, dict) or not all(
            isinstance(summary.get(k), int) for k in ("ok", "error")):
        return None
    return summary


def _record_summary(tail: bytes) -> None:
    summary = batch_summary(tail)
    if summary is not None:
        record_batch(summary["ok"] + summary["error"], summary["ok"], summary["error"])


def _watch_stream(chunks):
    """Pass a streamed batch answer through, then count its closing summary line."""
    tail = b""
    try:
        for chunk in chunks:
            yield chunk
            data = chunk.encode() if isinstance(chunk, str) else chunk
            tail = (tail + data)[-1024:]
    finally:
        close = getattr(chunks, "close", None)
        if close is not None:
            close()
    _record_summary(tail)


def render_metrics() -> tuple[bytes, str]:
    """Prometheus text exposition of every worker's samples, and its content type."""
    from prometheus_client import REGISTRY, CollectorRegistry, generate_latest
    from prometheus_client.exposition import CONTENT_TYPE_PLAIN_0_0_4 as TEXT_0_0_4

    metrics()  # make sure the families exist even before the first request
    if os.environ.get(MULTIPROC_ENV):
        from prometheus_client import multiprocess

        registry = CollectorRegistry()
        multiprocess.MultiProcessCollector(registry)
        return generate_latest(registry), TEXT_0_0_4
    return generate_latest(REGISTRY), TEXT_0_0_4


# ---- gunicorn hooks (run in the master) -------------------------------------------------------

def prepare_multiprocess_dir() -> str:
    """Point ``PROMETHEUS_MULTIPROC_DIR`` at an empty directory before workers start.

    An operator-chosen directory is emptied of stale ``*.db`` files (they would add old counts);
    otherwise a private temporary directory is created and removed again by
    :func:`remove_multiprocess_dir`.
    """
    path = os.environ.get(MULTIPROC_ENV)
    if path:
        os.makedirs(path, exist_ok=True)
        for name in os.listdir(path):
            if name.endswith(".db"):
                os.unlink(os.path.join(path, name))
    else:
        path = tempfile.mkdtemp(prefix="curvewise-metrics-")
        os.environ[MULTIPROC_ENV] = path
        os.environ[_OWNED_DIR_ENV] = path
    return path


def mark_worker_dead(pid: int) -> None:
    """Drop a dead worker's live gauges (its counters stay: totals never go down)."""
    if os.environ.get(MULTIPROC_ENV):
        from prometheus_client import multiprocess

        multiprocess.mark_process_dead(pid)


def remove_multiprocess_dir() -> None:
    """Delete the temporary metrics directory if :func:`prepare_multiprocess_dir` made it."""
    path = os.environ.get(_OWNED_DIR_ENV)
    if path and path == os.environ.get(MULTIPROC_ENV):
        shutil.rmtree(path, ignore_errors=True)


# ---- Flask wiring -------------------------------------------------------------------------------

def _count_fit_failures(app: Flask) -> None:
    """Wrap the app's FitError handler so each refused input is counted by reason."""
    handlers = app.error_handler_spec.setdefault(None, {}).setdefault(None, {})
    original = handlers.get(FitError)

    def counted(error: FitError):
        record_fit_failure(error.code)
        if original is None:
            raise error
        return original(error)

    handlers[FitError] = counted


def install(app: Flask) -> None:
    """Request ids, JSON request logs, request metrics and ``GET /metrics`` on ``app``."""
    settings = app.config["CURVEWISE"]
    configure_logging(settings.log_level)
    _count_fit_failures(app)
    m = metrics()

    @app.before_request
    def _start() -> None:
        ctx = g._get_current_object()  # one proxy lookup, not one per attribute
        ctx.request_id = incoming_request_id()
        ctx.request_started = time.perf_counter()
        m.in_progress.inc()

    @app.after_request
    def _finish(response: Response) -> Response:
        ctx = g._get_current_object()
        started = ctx.pop("request_started", None)
        request_id = ctx.get("request_id")
        response.headers[REQUEST_ID_HEADER] = request_id or incoming_request_id()
        if started is None:  # a before_request hook ahead of ours answered
            return response
        m.in_progress.dec()
        elapsed = time.perf_counter() - started
        req = request._get_current_object()
        method = req.method if req.method in _METHODS else "OTHER"
        rule = req.url_rule
        route = rule.rule if rule is not None else "<unmatched>"
        status = response.status_code
        counter, latency = m.request_children(method, route, status)
        counter.inc()
        latency.observe(elapsed)
        if route == BATCH_ROUTE and status == 200:
            if response.is_streamed:
                response.response = _watch_stream(response.response)
            else:
                _record_summary(response.get_data()[-1024:])
        if access_log.isEnabledFor(logging.INFO):
            environ = req.environ
            record = info_record(access_log.name, "request", __file__)
            record.request_id = request_id
            record.fields = {
                "method": method, "route": route, "path": req.path, "status": status,
                "duration_ms": round(elapsed * 1000, 3), "bytes_in": req.content_length,
                "bytes_out": response.content_length, "remote_addr": environ.get("REMOTE_ADDR"),
                # set by the proxy; the header's WSGI variable (what req.headers.get reads)
                "forwarded_for": environ.get("HTTP_X_FORWARDED_FOR"),
            }
            access_log.handle(record)
        return response

    api = app.extensions.get("curvewise-api")
    if api is not None:
        api.register_blueprint(blp)
    else:
        app.add_url_rule("/metrics", view_func=prometheus_metrics)


blp = Blueprint("metrics", __name__, description="Prometheus metrics.")


@blp.route("/metrics", methods=["GET"])
@blp.doc(responses={"200": {"description": "Prometheus text exposition format 0.0.4.",
                            "content": {"text/plain": {"schema": {"type": "string"}}}}})
def prometheus_metrics():
    """Prometheus text format: request, latency, fit-failure and batch-size metrics."""
    body, content_type = render_metrics()
    return Response(body, content_type=content_type, headers={"Cache-Control": "no-store"})
