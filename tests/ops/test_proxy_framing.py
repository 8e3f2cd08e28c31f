"""Framing the WSGI layer never sees: what the bare server answers, and what the documented
nginx configuration (docs/operations.md) answers instead.

gunicorn refuses a malformed request before the application runs, with its own text/html page
(bad or doubled Content-Length, Transfer-Encoding with Content-Length: RFC 9112 section 6.3
says to refuse them; an over-long request line or header). The proxy in front refuses the
same requests itself and, with the documented error_page settings, answers problem+json with
catalogue codes; the service's own problem answers pass through untouched. One gap stays
documented: more than 100 header fields within nginx's size limits reach gunicorn (431 page).
"""

from __future__ import annotations

import json
import re

import pytest

from tests.ops.harness import raw_exchange, server
from tests.ops.test_slow_clients import nginx_in_front

pytestmark = pytest.mark.live
POST = b"POST /v1/fit HTTP/1.1\r\nHost: x\r\nContent-Type: application/json\r\n"
CASES = {  # name: (raw request, status and code through the proxy)
    "bad content-length": (POST + b"Content-Length: 12abc\r\n\r\n{}", 400, "malformed_request"),
    "two content-lengths": (POST + b"Content-Length: 2\r\nContent-Length: 3\r\n\r\n{}", 400,
                            "malformed_request"),
    "transfer-encoding with content-length": (
        POST + b"Content-Length: 4\r\nTransfer-Encoding: chunked\r\n\r\n2\r\n{}\r\n0\r\n\r\n",
        400, "malformed_request"),
    "unknown transfer coding": (
        POST + b"Transfer-Encoding: gzip, chunked\r\n\r\n2\r\n{}\r\n0\r\n\r\n", 501,
        "unsupported_transfer_coding"),
    "malformed request line": (b"GET /healthz HTTP/1.1 extra\r\nHost: x\r\n\r\n", 400,
                               "malformed_request"),
    "request line of 20 KB": (b"GET /healthz?" + b"a" * 20000 + b" HTTP/1.1\r\nHost: x\r\n\r\n",
                              414, "uri_too_long"),
    "header line of 20 KB": (b"GET /healthz HTTP/1.1\r\nHost: x\r\nX-Big: " + b"a" * 20000
                             + b"\r\n\r\n", 431, "headers_too_large"),
    "declared body over the proxy's limit": (POST + b"Content-Length: 100000000\r\n\r\n{", 413,
                                             "body_too_large"),
}


def _answer(port: int, data: bytes) -> tuple[int, str, bytes]:
    raw = raw_exchange(port, data, timeout=10.0)
    head, _, body = raw.partition(b"\r\n\r\n")
    status = int(head.split(b" ", 2)[1]) if head.startswith(b"HTTP/") else 0
    kind = re.search(rb"(?im)^content-type:\s*([^\r\n;]*)", head)
    return status, kind.group(1).decode() if kind else "", body


@pytest.fixture(scope="module")
def srv():
    with server(workers=2) as s:
        yield s


@pytest.fixture(scope="module")
def proxy_port(srv, tmp_path_factory):
    with nginx_in_front(srv.port, tmp_path_factory.mktemp("nginx")) as port:
        yield port


@pytest.mark.parametrize("name", sorted(CASES))
def test_the_proxy_answers_bad_framing_as_problem_json(proxy_port, name):
    data, status, code = CASES[name]
    got, media, body = _answer(proxy_port, data)
    assert (got, media) == (status, "application/problem+json"), (name, got, body[:200])
    problem = json.loads(body)
    assert problem["code"] == code and problem["status"] == status
    assert problem["type"] == f"/problems/{code}" and problem["errors"]


def test_the_services_own_problems_pass_the_proxy_untouched(proxy_port):
    data = POST + b"Content-Length: 5\r\nConnection: close\r\n\r\n{nope"
    status, media, body = _answer(proxy_port, data)
    page = _answer(proxy_port, b"GET /problems/malformed_request HTTP/1.1\r\nHost: x\r\n"
                               b"Connection: close\r\n\r\n")
    assert (status, media) == (400, "application/problem+json")
    assert json.loads(body)["code"] == "invalid_json"  # the service's, not the proxy's
    assert page[0] == 200  # the proxy's codes have their pages on the service


def test_the_bare_server_answers_these_with_gunicorns_own_pages(srv):
    # documented behaviour without the proxy: gunicorn refuses them before the app runs
    for name, (data, _, _) in CASES.items():
        if name in ("unknown transfer coding", "declared body over the proxy's limit"):
            continue  # these two reach the service (422 problem / 413 problem)
        status, media, _ = _answer(srv.port, data)
        assert 400 <= status < 500 and media == "text/html", (name, status, media)


def test_too_many_header_fields_pass_the_proxy_and_get_gunicorns_page(proxy_port):
    # the documented gap: nginx limits header size, not count; gunicorn allows 100 fields
    data = b"GET /healthz HTTP/1.1\r\nHost: x\r\n" + b"".join(
        b"X-H%d: v\r\n" % i for i in range(150)) + b"Connection: close\r\n\r\n"
    status, media, _ = _answer(proxy_port, data)
    assert (status, media) == (431, "text/html")
