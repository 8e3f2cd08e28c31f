"""A real gunicorn (``python -m service.cli serve``) on a loopback port, over HTTP
with httpx."""

from __future__ import annotations

import socket

import httpx
import numpy as np
import pytest

from tests.conftest import load_nist

pytestmark = pytest.mark.live


def test_fit_over_http_matches_nist(live_url):
    # Source: NIST StRD Pontius certified coefficients (../shared/reference).
    ref = load_nist("pontius")
    with httpx.Client(base_url=live_url, timeout=10.0) as http:
        response = http.post("/v1/fit", json={"x": ref["data"]["x"], "y": ref["data"]["y"],
                                              "model": {"degree": 2}})
    assert response.status_code == 200
    assert response.headers["content-type"].startswith("application/json")
    got = [c["estimate"] for c in response.json()["coefficients"]]
    assert np.allclose(got, ref["certified"]["coefficients"], rtol=1e-11, atol=0)


def test_problems_over_http(live_url):
    with httpx.Client(base_url=live_url, timeout=10.0) as http:
        nan = http.post("/v1/fit", content=b'{"x": [1, NaN], "y": [1, 2]}',
                        headers={"Content-Type": "application/json"})
        wrong = http.put("/v1/fit", json={})
        plain = http.post("/v1/fit", content=b"x=1", headers={"Content-Type": "text/plain"})
        ready = http.get("/readyz")
        docs = http.get("/docs")
    assert nan.status_code == 400 and nan.headers["content-type"] == "application/problem+json"
    assert "NaN" in nan.json()["detail"]
    assert wrong.status_code == 405 and "POST" in wrong.headers["allow"]
    assert plain.status_code == 415 and plain.json()["code"] == "unsupported_media_type"
    assert ready.json() == {"status": "ready"}
    assert docs.status_code == 200 and "/v1/fit" in docs.text


def test_oversize_body_is_refused_before_it_is_sent(live_url):
    # Declare a body far over the 64 MiB default but send none of it: the answer must come
    # back at once (413), which shows the server did not wait to read the body.
    host, port = live_url.removeprefix("http://").split(":")
    request = (f"POST /v1/fit HTTP/1.1\r\nHost: {host}\r\nContent-Type: application/json\r\n"
               f"Content-Length: {10**10}\r\nConnection: close\r\n\r\n").encode()
    with socket.create_connection((host, int(port)), timeout=10.0) as sock:
        sock.sendall(request)
        answer = b""
        while b"\r\n\r\n" not in answer:
            chunk = sock.recv(65536)
            if not chunk:
                break
            answer += chunk
    status_line = answer.split(b"\r\n", 1)[0]
    assert b" 413 " in status_line, answer[:300]
    assert b"application/problem+json" in answer


def test_truncated_body_is_a_400_problem(live_url):
    # The client declares 100 bytes, sends 9 and stops sending: a clear 400, not a hang or 500.
    host, port = live_url.removeprefix("http://").split(":")
    with socket.create_connection((host, int(port)), timeout=10.0) as sock:
        sock.sendall(b"POST /v1/fit HTTP/1.1\r\nHost: x\r\nContent-Type: application/json\r\n"
                     b"Content-Length: 100\r\n\r\n{\"x\": [1,")
        sock.shutdown(socket.SHUT_WR)
        answer = b""
        while chunk := sock.recv(65536):
            answer += chunk
    assert answer.startswith(b"HTTP/1.1 400"), answer[:300]
    assert b"application/problem+json" in answer and b"declared" in answer
