"""The client in-process against a hand-written fake WSGI app (PEP 3333), no server code involved.

Checks the request the client builds, the typed frozen results it returns, the
error classes it raises, and lazy NDJSON streaming through the WSGI transport.
"""

from __future__ import annotations

import dataclasses
import json
import math
import threading

import numpy as np
import pytest
from curvewise_client import (
    AnovaRow,
    BadRequest,
    Client,
    Coefficient,
    FitResult,
    PayloadTooLarge,
    ProtocolError,
    ServiceUnavailable,
    UnprocessableInput,
    UnsupportedMediaType,
    WSGITransport,
)
from curvewise_client.bodies import encode

# The response example of the wire contract (shared/design/contract.md), trimmed.
FIT_RESPONSE = {
    "model": {"family": "polynomial", "degree": 2, "intercept": True,
              "terms": ["intercept", "x", "x^2"]},
    "n": 3,
    "coefficients": [{"term": "intercept", "estimate": 0.1, "std_error": 0.01, "t": 10.0,
                      "p_value": 0.001, "lower": 0.07, "upper": 0.13}],
    "anova": [{"term": "x", "df": 1, "sum_of_squares": 1.0, "mean_square": 1.0, "f": 9.0,
               "p_value": 0.01},
              {"term": "residual", "df": 10, "sum_of_squares": 1.1, "mean_square": 0.11, "f": None,
               "p_value": None}],
    "statistics": {"r_squared": 0.9, "adj_r_squared": 0.88, "sigma": 0.33, "df_residual": 10,
                   "aic": 1.0, "bic": None},
    "selection": {"method": "sequential_f", "chosen_degree": 2,
                  "candidates": [{"degree": 1, "aic": 3.0}, {"degree": 2, "aic": 1.0}]},
    "grid": {"x": [0.5, 1.0], "fit": [1.0, 2.0], "mean_lower": [0.9, 1.9],
             "mean_upper": [1.1, 2.1], "obs_lower": [0.5, 1.5], "obs_upper": [1.5, 2.5]},
    "warnings": [{"code": "few_points", "message": "only 3 points"}],
    "fitted_model": {"schema_version": 1, "checksum": "abc", "coefficients": [0.1, 0.2]},
    "a_member_added_later": {"kept": True},
}


class FakeApp:
    """A WSGI app that records each environ and answers from a routing table."""

    def __init__(self):
        self.calls: list[dict] = []
        self.replies: dict[str, tuple[int, str, bytes]] = {}

    def __call__(self, environ, start_response):
        body = environ["wsgi.input"].read() if environ.get("CONTENT_LENGTH") else b""
        self.calls.append({**environ, "body": body})
        status, ctype, out = self.replies.get(environ["PATH_INFO"],
                                              (404, "application/problem+json", b"{}"))
        start_response(f"{status} X", [("Content-Type", ctype)])
        return [out]


def _problem(status, title, errors=None) -> bytes:
    return json.dumps({"type": "t", "title": title, "status": status, "detail": "d",
                       "errors": errors or {}}).encode()


@pytest.fixture
def fake():
    app = FakeApp()
    app.replies["/v1/fit"] = (200, "application/json", json.dumps(FIT_RESPONSE).encode())
    return app


def test_request_reaches_the_app_as_wsgi_environ(fake):
    client = Client("http://svc.test:8080/", token="t0k", transport=WSGITransport(fake))
    client.fit([1, 2, 3], [2.5, 3.5, 5.0], weights=[1, 1, 2], degree=2,
               grid={"count": 50}, missing="drop")
    env = fake.calls[0]
    assert (env["REQUEST_METHOD"], env["PATH_INFO"], env["SERVER_PORT"]) == ("POST", "/v1/fit",
                                                                             "8080")
    assert env["CONTENT_TYPE"] == "application/json"
    assert env["HTTP_AUTHORIZATION"] == "Bearer t0k"
    assert env["HTTP_ACCEPT"] == "application/json"
    assert int(env["CONTENT_LENGTH"]) == len(env["body"])
    assert json.loads(env["body"]) == {"x": [1, 2, 3], "y": [2.5, 3.5, 5.0], "weights": [1, 1, 2],
                                       "model": {"degree": 2}, "grid": {"count": 50},
                                       "missing": "drop"}


def test_fit_result_is_typed_frozen_and_keeps_unknown_members(fake):
    fit = Client("http://t", transport=WSGITransport(fake)).fit([1, 2, 3], [1, 2, 3])
    assert isinstance(fit, FitResult) and fit.chosen_degree == 2
    assert fit.model.terms == ("intercept", "x", "x^2")
    assert fit.coefficients[0] == Coefficient("intercept", 0.1, 0.01, 10.0, 0.001, 0.07, 0.13)
    assert fit.anova[-1] == AnovaRow("residual", 10, 1.1, 0.11, None, None)
    assert fit.statistics.bic is None and fit.statistics.sigma == 0.33
    assert [c.degree for c in fit.selection.candidates] == [1, 2]
    assert fit.selection.candidates[1].aic == 1.0
    assert fit.grid.obs_upper == (1.5, 2.5)
    assert fit.warnings[0].code == "few_points"
    assert fit.raw["a_member_added_later"]["kept"] is True
    with pytest.raises(dataclasses.FrozenInstanceError):
        fit.n = 4
    with pytest.raises(TypeError):
        fit.fitted_model["checksum"] = "forged"
    with pytest.raises(TypeError):
        fit.raw["n"] = 4


def test_predict_and_invert_send_the_document_back_unchanged(fake):
    fake.replies["/v1/predict"] = (200, "application/json", json.dumps({"predictions": [
        {"x": 2.0, "fit": 3.0, "mean_lower": 2.5, "mean_upper": 3.5, "obs_lower": 1.0,
         "obs_upper": 5.0, "extrapolated": False}]}).encode())
    fake.replies["/v1/invert"] = (200, "application/json", json.dumps({"estimates": [
        {"y": 3.0, "x": 2.0, "lower": 1.5, "upper": 2.5, "status": "ok",
         "other_roots": [-7.0]}]}).encode())
    client = Client("http://t", transport=WSGITransport(fake))
    fit = client.fit([1, 2, 3], [1, 2, 3])
    pred = client.predict(fit, [2.0], level=0.9)
    est = client.invert(fit.fitted_model, [3.0], replicates=2)
    sent_predict, sent_invert = (json.loads(c["body"]) for c in fake.calls[1:])
    assert sent_predict == {"fitted_model": FIT_RESPONSE["fitted_model"], "x": [2.0],
                            "level": 0.9}
    assert sent_invert["fitted_model"] == FIT_RESPONSE["fitted_model"]
    assert sent_invert["replicates"] == 2
    assert pred.predictions[0].extrapolated is False and pred.predictions[0].obs_upper == 5.0
    assert est.estimates[0].other_roots == (-7.0,) and est.estimates[0].status == "ok"


@pytest.mark.parametrize("status, cls", [(400, BadRequest), (413, PayloadTooLarge),
                                         (415, UnsupportedMediaType), (422, UnprocessableInput)])
def test_error_statuses_map_to_the_documented_classes(fake, status, cls):
    fake.replies["/v1/fit"] = (status, "application/problem+json",
                               _problem(status, "Nope", {"y[2]": ["must be finite"]}))
    with pytest.raises(cls) as info:
        Client("http://t", transport=WSGITransport(fake)).fit([1, 2, 3], [1, 2, 3])
    assert info.value.problem.status == status
    assert info.value.field_errors == {"y[2]": ("must be finite",)}


def test_encode_keeps_digits_turns_nan_into_null_and_refuses_infinity():
    assert json.loads(encode({"y": [0.1 + 0.2, 1e-310, 2.0 ** 70]})) == {
        "y": [0.30000000000000004, 1e-310, 2.0 ** 70]}
    assert json.loads(encode({"y": [1.0, math.nan]})) == {"y": [1.0, None]}
    with pytest.raises(ValueError, match=r"y\[1\] is infinite"):
        encode({"y": [1.0, math.inf]})
    arr = np.array([1.5, 2.5])
    assert json.loads(encode({"x": arr, "n": np.int64(2)})) == {"x": [1.5, 2.5], "n": 2}


def test_plot_returns_image_bytes_and_asks_by_accept(fake):
    fake.replies["/v1/plot"] = (200, "image/svg+xml", b"<svg/>")
    client = Client("http://t", transport=WSGITransport(fake))
    figure = client.plot([1, 2, 3], [1, 2, 3], format="svg", panels=["fit", "spread"],
                         width=640, x_label="EC (dS/m)", simultaneous=True, max_degree=2)
    env = fake.calls[0]
    assert env["HTTP_ACCEPT"] == "image/svg+xml"
    body = json.loads(env["body"])
    assert body["plot"] == {"format": "svg", "panels": ["fit", "spread"], "width": 640,
                            "x_label": "EC (dS/m)", "simultaneous": True}
    assert body["model"] == {"max_degree": 2}
    assert (figure.format, figure.data) == ("svg", b"<svg/>")
    fake.replies["/v1/plot"] = (200, "application/json", b"{}")
    with pytest.raises(ProtocolError):
        client.plot([1, 2, 3], [1, 2, 3])


def _ndjson_app(log: list):
    """Reads NDJSON lines lazily from wsgi.input and answers each one as it is read."""

    def app(environ, start_response):
        if environ.get("CONTENT_TYPE") != "application/x-ndjson":
            start_response("503 Service Unavailable",
                           [("Content-Type", "application/problem+json")])
            return [_problem(503, "busy")]
        start_response("200 OK", [("Content-Type", "application/x-ndjson")])

        def lines():
            stream = environ["wsgi.input"]
            for _ in range(1000):  # bounded
                line = stream.readline()
                if not line:
                    served = sum(1 for event in log if event[0] == "served")
                    yield json.dumps({"summary": {"ok": served}}).encode() + b"\n"
                    return
                data = json.loads(line)
                log.append(("served", data.get("id")))
                yield json.dumps({"id": data.get("id"), "status": "ok",
                                  "fit": {"n": len(data.get("x", []))}}).encode() + b"\n"
        return lines()

    return app


def test_batch_stream_is_lazy_in_process():
    log: list = []

    def series():
        for i in range(4):
            log.append(("produced", f"s{i}"))
            yield {"id": f"s{i}", "x": np.arange(i + 3.0), "y": np.ones(i + 3)}

    client = Client("http://t", transport=WSGITransport(_ndjson_app(log)))
    items = []
    stream = client.batch_stream(series())
    for item in stream:
        log.append(("received", item.id))
        items.append(item)
    assert [it.fit["n"] for it in items] == [3, 4, 5, 6] and all(it.ok for it in items)
    assert stream.summary == {"ok": 4}  # the summary line is not an item
    # each result is received before the next series is even produced
    assert log[:6] == [("produced", "s0"), ("served", "s0"), ("received", "s0"),
                       ("produced", "s1"), ("served", "s1"), ("received", "s1")]


def test_a_streamed_batch_is_never_retried():
    calls = []

    def busy(environ, start_response):
        calls.append(1)
        start_response("503 Service Unavailable", [("Content-Type", "application/problem+json")])
        return [_problem(503, "busy")]

    client = Client("http://t", retries=3, transport=WSGITransport(busy), sleep=lambda s: None)
    with pytest.raises(ServiceUnavailable):
        client.batch_stream(iter([{"id": "a", "x": [1], "y": [1]}]))
    assert calls == [1]
    with pytest.raises(ServiceUnavailable):
        client.batch([{"id": "a", "x": [1], "y": [1]}])
    assert len(calls) == 5  # a JSON batch is retried: 1 + 3 retries


def test_wsgi_transport_is_thread_safe_for_parallel_calls(fake):
    client = Client("http://t", transport=WSGITransport(fake))
    results, errors = [], []

    def work():
        try:
            results.append(client.fit([1, 2, 3], [1, 2, 3]).chosen_degree)
        except Exception as exc:  # noqa: BLE001 - collected and asserted below
            errors.append(exc)

    threads = [threading.Thread(target=work) for _ in range(8)]
    for t in threads:
        t.start()
    for t in threads:
        t.join(timeout=10)
    assert errors == [] and results == [2] * 8
