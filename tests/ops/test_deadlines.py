"""The compute deadline around compiled code: always a 503 problem, or an error line followed
by the summary, never a 500 or a stream cut short.

In-process (the Flask test client runs in the main thread, so the guard's timer is armed):
seeded deadlines land at every point of a /v1/batch with detail "full" (numba kernels, their
loading, Python glue); before the checkpoints, an alarm inside numba's machinery gave a 500
in 5 of 8 tries. Live (gunicorn): a body trickled past the deadline, on JSON and on NDJSON.
Data are invented and seeded.
"""

from __future__ import annotations

import io
import json
import random
import socket
import sys
import time

import numpy as np
import orjson
import pytest

from service.app import create_app
from tests.ops.harness import request, server

NDJSON = "application/x-ndjson"


def _series(count: int, points: int, seed: int) -> list[dict]:
    rng = np.random.default_rng(seed)
    out = []
    for i in range(count):
        x = np.sort(rng.uniform(0.0, 10.0, points))
        y = 1.0 + 0.8 * x - 0.05 * x**2 + rng.normal(0.0, 0.3, points)
        out.append({"id": f"s{i}", "x": x.round(6).tolist(), "y": y.round(6).tolist()})
    return out


SERIES = _series(1500, 60, seed=20261204)


def _client(timeout: float):
    app = create_app({"request_timeout": timeout})
    app.config["TESTING"] = True
    return app.test_client()


def test_deadlines_landing_anywhere_in_a_full_batch_answer_503_or_200():
    rng = random.Random(20261204)
    body = {"series": SERIES, "model": {"max_degree": 4}, "detail": "full"}
    seen = []
    for _ in range(8):
        response = _client(rng.uniform(0.05, 0.6)).post("/v1/batch", json=body)
        try:
            seen.append(response.status_code)
            assert response.status_code in (200, 503), response.data[:300]
            if response.status_code == 503:
                problem = response.get_json()
                assert response.mimetype == "application/problem+json"
                assert problem["code"] == "timeout"
        finally:
            response.close()
    assert 503 in seen  # the deadlines did land inside the work


def _ndjson_lines(client, body: bytes) -> list[dict]:
    response = client.post("/v1/batch", data=body, content_type=NDJSON, buffered=False)
    try:
        assert response.status_code == 200
        return [orjson.loads(line) for chunk in response.response
                for line in chunk.splitlines() if line]
    finally:
        response.close()


def test_a_stream_cut_by_the_deadline_ends_with_an_error_line_and_the_summary():
    rng = random.Random(7)
    options = orjson.dumps({"options": {"model": {"max_degree": 4}, "detail": "full"}})
    body = options + b"\n" + b"\n".join(orjson.dumps(s) for s in SERIES) + b"\n"
    for _ in range(5):
        lines = _ndjson_lines(_client(rng.uniform(0.05, 0.4)), body)
        summary = lines[-1]["summary"]
        answered = [line["line"] for line in lines[:-1]]
        assert answered == sorted(answered) and len(set(answered)) == len(answered)
        if "truncated_at_line" in summary:
            cut = lines[-2]
            assert cut["status"] == "error" and cut["error"]["code"] == "timeout", cut
            assert cut["line"] == summary["truncated_at_line"]
            assert all(line < cut["line"] for line in answered[:-1])
            assert summary["ok"] + summary["error"] == len(answered) - 1
        else:
            assert len(answered) == len(SERIES)


# ---- live: a body that arrives too slowly --------------------------------------------------

@pytest.fixture(scope="module")
def slow_srv():
    # full reports for many series, so a batch's work outlasts the 1 s deadline on any
    # machine (its own full-detail limit raised for that)
    with server(workers=2, env={"CURVEWISE_REQUEST_TIMEOUT": "1",
                                "CURVEWISE_MAX_FULL_SERIES": "20000"}) as s:
        yield s


def _trickle(port: int, media: str, body: bytes, seconds: float) -> bytes:
    head = (f"POST /v1/batch HTTP/1.1\r\nHost: 127.0.0.1\r\nContent-Type: {media}\r\n"
            f"Content-Length: {len(body) + 1000}\r\nConnection: close\r\n\r\n").encode()
    with socket.create_connection(("127.0.0.1", port), timeout=10) as sock:
        sock.sendall(head)
        deadline = time.monotonic() + seconds
        sent = 0
        try:
            while time.monotonic() < deadline and sent < len(body):
                sock.sendall(body[sent:sent + 16])
                sent += 16
                time.sleep(0.05)
        except OSError:
            pass  # the server answered and closed
        answer = b""
        try:
            while chunk := sock.recv(65536):
                answer += chunk
        except OSError:
            pass
    return answer


@pytest.mark.live
@pytest.mark.parametrize("media", ["application/json", NDJSON])
def test_a_body_trickled_past_the_deadline_is_a_503_problem(slow_srv, media):
    body = json.dumps({"series": SERIES[:20]}).encode() if media != NDJSON else \
        b"\n".join(orjson.dumps(s) for s in SERIES[:20])
    answer = _trickle(slow_srv.port, media, body, seconds=3.0)
    status_line, _, rest = answer.partition(b"\r\n")
    assert status_line.startswith(b"HTTP/1.1 503"), answer[:300]
    headers, _, payload = rest.partition(b"\r\n\r\n")
    assert b"application/problem+json" in headers.lower()
    assert json.loads(payload)["code"] == "timeout"


@pytest.mark.live
def test_live_full_batches_past_the_deadline_are_503_problems(slow_srv):
    body = {"series": _series(12000, 60, seed=3), "model": {"max_degree": 4},
            "detail": "full"}
    for _ in range(4):
        status, headers, payload = request(slow_srv.url, "POST", "/v1/batch", body, timeout=60)
        assert status == 503, payload[:300]
        assert headers["content-type"] == "application/problem+json"
        assert json.loads(payload)["code"] == "timeout"


@pytest.mark.live
def test_live_stream_cut_by_the_deadline_ends_with_the_summary(slow_srv):
    options = orjson.dumps({"options": {"model": {"max_degree": 4}, "detail": "full"}})
    body = options + b"\n" + b"\n".join(orjson.dumps(s) for s in _series(12000, 60, 4)) + b"\n"
    status, headers, payload = request(slow_srv.url, "POST", "/v1/batch", body,
                                       headers={"Content-Type": NDJSON}, timeout=60)
    assert status == 200
    lines = [json.loads(line) for line in payload.splitlines() if line]
    assert lines[-2]["error"]["code"] == "timeout"
    assert lines[-1]["summary"]["truncated_at_line"] == lines[-2]["line"]


def test_a_finished_answer_is_never_cut_while_the_server_writes_it():
    # the timer guards computing, not a slow reader: a produced JSON answer is written whole
    # the limit leaves ample time to compute (a loaded machine must not turn it into a 503)
    app = create_app({"request_timeout": 1.5})
    body = orjson.dumps({"series": SERIES[:200], "model": {"degree": 2}})
    environ = {"REQUEST_METHOD": "POST", "PATH_INFO": "/v1/batch", "SERVER_NAME": "test",
               "SERVER_PORT": "80", "SERVER_PROTOCOL": "HTTP/1.1", "wsgi.url_scheme": "http",
               "wsgi.input": io.BytesIO(body), "CONTENT_LENGTH": str(len(body)),
               "CONTENT_TYPE": "application/json", "wsgi.errors": sys.stderr}
    status = []
    result = app(environ, lambda s, h, *a: status.append(s))
    try:
        time.sleep(2.0)  # a slow reader: the limit passes before the first byte is taken
        payload = b"".join(result)
    finally:
        getattr(result, "close", lambda: None)()
    assert status[0].startswith("200")
    assert len(orjson.loads(payload)["results"]) == 200
