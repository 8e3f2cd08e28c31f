"""Chunked request bodies against a live gunicorn: 200 at the limit, 413 above, 400 for bad
framing, always as problem+json (HTTP/1.1 chunked coding: RFC 9112 section 7.1).

The project's own client streams NDJSON batches chunked, so the same holds for
``Client.batch_stream``. Bodies are built to an exact length (JSON allows trailing
whitespace); chunk sizes come from a seeded generator.
"""

from __future__ import annotations

import json
import random

import pytest
from curvewise_client import Client

from tests.ops.harness import raw_exchange, server

pytestmark = pytest.mark.live
LIMIT = 8192


@pytest.fixture(scope="module")
def srv():
    with server(workers=2, env={"CURVEWISE_MAX_BODY_BYTES": str(LIMIT)}) as s:
        yield s


def _json_body(size: int) -> bytes:
    core = json.dumps({"x": [1, 2, 3, 4], "y": [1.1, 1.9, 3.2, 3.9],
                       "model": {"degree": 1}}).encode()
    return core + b" " * (size - len(core))


def _ndjson_body(size: int) -> bytes:
    line = json.dumps({"x": [1, 2, 3, 4], "y": [1.1, 1.9, 3.2, 3.9]}).encode()
    body = b""
    while len(body) + 2 * (len(line) + 1) <= size:
        body += line + b"\n"
    return body + line + b" " * (size - len(body) - len(line) - 1) + b"\n"


def _chunked(body: bytes, rng: random.Random) -> bytes:
    out, at = [], 0
    while at < len(body):
        size = rng.randint(1, 3000)
        piece = body[at:at + size]
        out.append(b"%X\r\n%s\r\n" % (len(piece), piece))
        at += size
    return b"".join(out) + b"0\r\n\r\n"


def _post_chunked(port: int, path: str, media: str, framed: bytes) -> tuple[int, bytes, bytes]:
    head = (f"POST {path} HTTP/1.1\r\nHost: 127.0.0.1\r\nContent-Type: {media}\r\n"
            "Transfer-Encoding: chunked\r\nConnection: close\r\n\r\n").encode()
    answer = raw_exchange(port, head + framed, timeout=20.0)
    status_line, _, rest = answer.partition(b"\r\n")
    headers, _, body = rest.partition(b"\r\n\r\n")
    status = int(status_line.split()[1]) if status_line.startswith(b"HTTP/") else 0
    return status, headers.lower(), body


@pytest.mark.parametrize("path, media, build", [
    ("/v1/fit", "application/json", _json_body),
    ("/v1/batch", "application/x-ndjson", _ndjson_body),
])
def test_chunked_bodies_at_and_around_the_limit(srv, path, media, build):
    rng = random.Random(20261204)
    for size in (LIMIT - 1, LIMIT, LIMIT + 1, LIMIT + 500, 4 * LIMIT):
        body = build(size)
        assert len(body) == size
        status, headers, answer = _post_chunked(srv.port, path, media, _chunked(body, rng))
        if size <= LIMIT:
            assert status == 200, (size, answer[:300])
            if media == "application/x-ndjson":
                assert b'"summary"' in answer
        else:
            assert status == 413, (size, answer[:300])
            assert b"application/problem+json" in headers
            assert json.loads(answer)["code"] == "body_too_large"


def test_a_valid_prefix_then_garbage_past_the_limit_is_not_accepted(srv):
    body = _json_body(LIMIT) + b"garbage" * 50
    status, headers, answer = _post_chunked(srv.port, "/v1/fit", "application/json",
                                            _chunked(body, random.Random(1)))
    assert status == 413 and b"application/problem+json" in headers, answer[:300]


@pytest.mark.parametrize("framed", [
    b"zz\r\n{}\r\n0\r\n\r\n",                         # a chunk size that is not hex
    b"5\r\n{\"x\":XX0\r\n\r\n",                       # a chunk without its CRLF
    b"-3\r\nabc\r\n0\r\n\r\n",                        # a negative size
])
@pytest.mark.parametrize("path, media", [("/v1/fit", "application/json"),
                                         ("/v1/batch", "application/x-ndjson")])
def test_broken_chunk_framing_is_a_400_problem(srv, framed, path, media):
    status, headers, answer = _post_chunked(srv.port, path, media, framed)
    assert status == 400, answer[:300]
    assert b"application/problem+json" in headers
    assert json.loads(answer)["code"] == "invalid_body"


def test_the_clients_chunked_stream_up_to_the_limit(srv):
    client = Client(srv.url, timeout=20.0, retries=0)
    series = [{"id": f"s{i}", "x": [1, 2, 3, 4], "y": [1.0, 2.1, 2.9, 4.2 + 0.01 * i]}
              for i in range(40)]  # about 3 KB on the wire
    with client.batch_stream(iter(series), model={"degree": 1}) as stream:
        results = list(stream)
    assert len(results) == 40 and all(r.status == "ok" for r in results)
