"""Request ids, JSON logs and Prometheus metrics, through the Flask test client.

The exposition is parsed with prometheus_client's own text parser (the reference
implementation of the Prometheus text format), not with string matching.
"""

from __future__ import annotations

import io
import json
import logging
import re

import pytest
from prometheus_client.parser import text_string_to_metric_families

from service.app import create_app
from service.core.errors import DesignError
from service.runtime import logs, observability


def samples(client) -> dict[tuple[str, tuple], float]:
    response = client.get("/metrics")
    assert response.status_code == 200
    assert response.mimetype == "text/plain"
    out = {}
    for family in text_string_to_metric_families(response.get_data(as_text=True)):
        for s in family.samples:
            out[(s.name, tuple(sorted(s.labels.items())))] = s.value
    return out


def value(snapshot, name, **labels) -> float:
    return snapshot.get((name, tuple(sorted(labels.items()))), 0.0)


@pytest.fixture
def app_with_probe():
    app = create_app({})

    @app.get("/test-only/design-error")
    def design_error():
        raise DesignError("two points cannot carry a cubic", field="model.degree",
                          fix="lower the degree")

    return app


def test_request_id_generated_echoed_and_sanitised(client):
    generated = client.get("/healthz").headers["X-Request-ID"]
    assert re.fullmatch(r"[0-9a-f]{32}", generated)
    assert client.get("/healthz").headers["X-Request-ID"] != generated
    given = "pipeline-7:step.3"
    assert client.get("/healthz", headers={"X-Request-ID": given}).headers["X-Request-ID"] == given
    for bad in ("has space", "x" * 200, 'quote"inject', "line\\nbreak"):
        echoed = client.get("/healthz", headers={"X-Request-ID": bad}).headers["X-Request-ID"]
        assert echoed != bad and re.fullmatch(r"[0-9a-f]{32}", echoed)
    assert "X-Request-ID" in client.get("/no-such-path").headers  # errors carry it too


def test_request_counts_and_latency_by_route_template_and_status(client):
    before = samples(client)
    for _ in range(3):
        client.get("/healthz")
    client.get("/no-such-path/12345")
    after = samples(client)
    count = "curvewise_http_requests_total"
    assert value(after, count, method="GET", route="/healthz", status="200") - \
        value(before, count, method="GET", route="/healthz", status="200") == 3
    assert value(after, count, method="GET", route="<unmatched>", status="404") - \
        value(before, count, method="GET", route="<unmatched>", status="404") == 1
    assert not any("12345" in str(labels) for _, labels in after)  # raw paths never become labels
    hist = "curvewise_http_request_duration_seconds_count"
    assert value(after, hist, method="GET", route="/healthz") - \
        value(before, hist, method="GET", route="/healthz") == 3
    inf = value(after, "curvewise_http_request_duration_seconds_bucket", method="GET",
                route="/healthz", le="+Inf")
    assert inf == value(after, hist, method="GET", route="/healthz")


def test_fit_failures_counted_by_reason_code(app_with_probe):
    client = app_with_probe.test_client()
    name = "curvewise_fit_failures_total"
    before = value(samples(client), name, reason="insufficient_design")
    response = client.get("/test-only/design-error")
    assert response.status_code == 422  # still the one error path's answer
    assert "model.degree" in response.get_json()["errors"]
    assert value(samples(client), name, reason="insufficient_design") == before + 1


BATCH = {"series": [{"id": "a", "x": [1, 2, 3, 4], "y": [1.0, 2.1, 2.9, 4.2]},
                    {"id": "b", "x": [1, 1], "y": [1.0, 2.0]},
                    {"id": "c", "x": [0, 1, 2], "y": [0.0, 1.0, 2.1]}],
         "model": {"degree": 1}}


def _batch_counts(client):
    snap = samples(client)
    return (value(snap, "curvewise_batch_series_count"), value(snap, "curvewise_batch_series_sum"),
            value(snap, "curvewise_batch_results_total", status="ok"),
            value(snap, "curvewise_batch_results_total", status="error"))


def test_batch_sizes_and_results_from_json_answers(client):
    before = _batch_counts(client)
    response = client.post("/v1/batch", json=BATCH)
    assert response.status_code == 200
    summary = response.get_json()["summary"]
    after = _batch_counts(client)
    assert [a - b for a, b in zip(after, before, strict=True)] == [
        1, 3, summary["ok"], summary["error"]]
    assert summary["ok"] + summary["error"] == 3


def test_batch_sizes_from_ndjson_streams(client):
    lines = [json.dumps({"options": {"model": BATCH["model"]}})]
    lines += [json.dumps(series) for series in BATCH["series"]]
    before = _batch_counts(client)
    response = client.post("/v1/batch", data="\n".join(lines) + "\n",
                           content_type="application/x-ndjson")
    assert response.status_code == 200 and response.is_streamed
    last = json.loads(response.get_data().splitlines()[-1])
    after = _batch_counts(client)
    assert [a - b for a, b in zip(after, before, strict=True)] == [
        1, 3, last["summary"]["ok"], last["summary"]["error"]]


def test_batch_summary_reader_ignores_other_bodies():
    assert observability.batch_summary(b'{"results": []}') is None
    assert observability.batch_summary(b'..."summary": {"ok": "x", "error": 1}}') is None
    assert observability.batch_summary(b'{"summary":{"ok":2,"error":0,"flagged":1}}') == {
        "ok": 2, "error": 0, "flagged": 1}


def test_logs_are_json_lines_with_request_id_and_never_bodies(app):
    stream = io.StringIO()
    handler = logging.StreamHandler(stream)
    handler.setFormatter(logs.JsonFormatter())
    logger = logging.getLogger("curvewise")
    logger.addHandler(handler)
    try:
        secret = "body-marker-7f3a91"
        client = app.test_client()
        client.post("/v1/fit", json={"x": [1, 2, 3], "y": [4, 5, 6], "note": secret},
                    headers={"X-Request-ID": "rid-42"})
        client.post("/v1/fit", data="{not json " + secret, content_type="application/json")
    finally:
        logger.removeHandler(handler)
    lines = [json.loads(line) for line in stream.getvalue().splitlines()]
    access = [line for line in lines if line["logger"] == "curvewise.access"]
    assert len(access) == 2
    first = access[0]
    assert first["request_id"] == "rid-42"
    assert first["method"] == "POST" and first["path"] == "/v1/fit"
    assert isinstance(first["status"], int) and first["duration_ms"] >= 0
    assert {"time", "level", "message"} <= set(first)
    assert secret not in stream.getvalue()


def test_json_formatter_keeps_exceptions_and_survives_odd_values():
    record = logging.LogRecord("curvewise.x", logging.ERROR, __file__, 1, "boom %s", ("\n\"",),
                               None)
    try:
        raise RuntimeError("inner")
    except RuntimeError:
        import sys
        record.exc_info = sys.exc_info()
    line = logs.JsonFormatter().format(record)
    parsed = json.loads(line)
    assert "\n" not in line
    assert parsed["message"] == 'boom \n"' and "RuntimeError: inner" in parsed["exception"]


def test_metrics_documented_in_openapi(client):
    spec = client.get("/openapi.json").get_json()
    assert "get" in spec["paths"]["/metrics"]


def test_multiprocess_dir_is_prepared_fresh(tmp_path, monkeypatch):
    stale = tmp_path / "counter_123.db"
    stale.write_bytes(b"old")
    keep = tmp_path / "README"
    keep.write_text("operator's file")
    monkeypatch.setenv(observability.MULTIPROC_ENV, str(tmp_path))
    assert observability.prepare_multiprocess_dir() == str(tmp_path)
    assert not stale.exists() and keep.exists()
    monkeypatch.delenv(observability.MULTIPROC_ENV)
    made = observability.prepare_multiprocess_dir()
    try:
        import os
        assert os.path.isdir(made) and os.environ[observability.MULTIPROC_ENV] == made
        observability.remove_multiprocess_dir()
        assert not os.path.exists(made)
    finally:
        monkeypatch.delenv(observability.MULTIPROC_ENV, raising=False)
        monkeypatch.delenv("CURVEWISE_OWNS_METRICS_DIR", raising=False)


def test_metrics_route_exists_once_per_app():
    # several apps in one process (as in tests) share the process's metric objects
    first, second = create_app({}).test_client(), create_app({}).test_client()
    assert first.get("/metrics").status_code == 200
    assert second.get("/metrics").status_code == 200


def test_failed_series_in_a_batch_are_counted_by_reason_code(client):
    # Series "b" has one distinct x for a straight line: the core's DesignError
    # (code insufficient_design); "d" is not a number array: a validation_error.
    body = {**BATCH, "series": BATCH["series"] + [{"id": "d", "x": [1, 2], "y": ["a", 2]}]}
    name = "curvewise_fit_failures_total"
    before = {code: value(samples(client), name, reason=code)
              for code in ("insufficient_design", "validation_error")}
    response = client.post("/v1/batch", json=body)
    assert response.status_code == 200
    codes = {r["id"]: r["error"]["code"] for r in response.get_json()["results"]
             if r["status"] == "error"}
    assert codes == {"b": "insufficient_design", "d": "validation_error"}
    after = samples(client)
    for code in before:
        assert value(after, name, reason=code) == before[code] + 1


def test_access_records_carry_what_a_log_record_built_normally_carries():
    # logs.info_record copies the per-process attributes of a first LogRecord and sets the
    # clock fields again: every attribute must match a LogRecord built now (clock ones close)
    import time

    from service.runtime.logs import info_record

    first = info_record("curvewise.test", "request", __file__)  # builds the template
    time.sleep(0.002)
    copied = info_record("curvewise.test", "request", __file__)
    normal = logging.LogRecord("curvewise.test", logging.INFO, __file__, 0, "request", None,
                               None)
    clock = {"created", "msecs", "relativeCreated"}
    assert copied is not first and set(vars(copied)) == set(vars(normal))
    assert {k: v for k, v in vars(copied).items() if k not in clock} == {
        k: v for k, v in vars(normal).items() if k not in clock}
    assert first.created < copied.created <= normal.created
    assert abs(copied.created - normal.created) < 1.0
    assert copied.msecs == int((copied.created - int(copied.created)) * 1000)
    assert copied.getMessage() == "request" and copied.levelname == "INFO"
