"""Operations checks against real gunicorn (2 sync workers) on 127.0.0.1.

Metrics merged across workers, auth, body limits seen on the wire, hostile JSON, the compute
deadline, graceful shutdown and a worker killed with SIGKILL under load.
Expected behaviour comes from the standards and the servers' documentation: RFC 9110 (413),
RFC 6750 (Bearer), prometheus_client's multiprocess-mode documentation, gunicorn's signal
handling documentation (TERM = graceful stop, in-flight requests finish).
"""

from __future__ import annotations

import json
import os
import signal
import socket
import threading
import time
from collections import Counter
from pathlib import Path

import numpy as np
import orjson
import pytest
from prometheus_client.parser import text_string_to_metric_families

from tests.ops.harness import (
    mixed_requests,
    post_while_reading,
    raw_exchange,
    request,
    run_load,
    server,
)

pytestmark = pytest.mark.live
TOKENS = ("ops-token-aaaaaaaaaaaaaaaa", "ops-token-bbbbbbbbbbbbbbbb")
AUTH = {"Authorization": f"Bearer {TOKENS[1]}"}
BODY_LIMIT = 200_000


@pytest.fixture(scope="module")
def metrics_dir(tmp_path_factory):
    return tmp_path_factory.mktemp("prom")


@pytest.fixture(scope="module")
def srv(metrics_dir):
    env = {"CURVEWISE_AUTH_TOKENS": ",".join(TOKENS), "CURVEWISE_MAX_BODY_BYTES": str(BODY_LIMIT),
           "PROMETHEUS_MULTIPROC_DIR": str(metrics_dir)}
    with server(workers=2, env=env) as s:
        yield s


def counter_total(url: str, name: str, **labels) -> float:
    status, _, raw = request(url, "GET", "/metrics")
    assert status == 200
    total = 0.0
    for family in text_string_to_metric_families(raw.decode()):
        for s in family.samples:
            if s.name == name and all(s.labels.get(k) == v for k, v in labels.items()):
                total += s.value
    return total


def concurrently(count: int, threads: int, call) -> Counter:
    results: Counter = Counter()
    lock = threading.Lock()
    todo = list(range(count))

    def work():
        while True:
            with lock:
                if not todo:
                    return
                todo.pop()
            outcome = call()
            with lock:
                results[outcome] += 1

    pool = [threading.Thread(target=work) for _ in range(threads)]
    for t in pool:
        t.start()
    for t in pool:
        t.join(timeout=60)
    return results


def test_metrics_merge_every_workers_counts(srv, metrics_dir):
    """One worker is held by a half-sent request while the other serves 40; /metrics (from
    either worker) counts every one of them, and both workers wrote samples."""
    name = "curvewise_http_requests_total"
    before = counter_total(srv.url, name, route="/healthz", status="200")
    fits_before = counter_total(srv.url, name, route="/v1/fit")
    body = json.dumps({"x": [1, 2, 3, 4], "y": [1.0, 2.1, 2.9, 4.2], "model": {"degree": 1}})
    head = (f"POST /v1/fit HTTP/1.1\r\nHost: 127.0.0.1\r\nContent-Type: application/json\r\n"
            f"Authorization: Bearer {TOKENS[0]}\r\nContent-Length: {len(body)}\r\n\r\n")
    with socket.create_connection(("127.0.0.1", srv.port), timeout=20) as held:
        held.sendall(head.encode() + body[:5].encode())  # a worker now waits for the rest
        time.sleep(0.3)
        results = concurrently(40, 4, lambda: request(srv.url, "GET", "/healthz")[0])
        held.sendall(body[5:].encode())
        answer = held.recv(65536)
    assert results == Counter({200: 40})
    assert answer.startswith(b"HTTP/1.1 200"), answer[:200]
    assert counter_total(srv.url, name, route="/healthz", status="200") - before == 40
    assert counter_total(srv.url, name, route="/v1/fit") - fits_before == 1
    writers = {p.stem.rsplit("_", 1)[-1] for p in Path(metrics_dir).glob("counter_*.db")}
    assert {str(pid) for pid in srv.workers()} <= writers, (writers, srv.workers())


def test_auth_on_the_wire(srv):
    status, headers, raw = request(srv.url, "GET", "/v1/families")
    assert status == 401 and headers["content-type"] == "application/problem+json"
    assert headers["www-authenticate"].startswith("Bearer")
    assert json.loads(raw)["status"] == 401
    status, headers, _ = request(srv.url, "GET", "/v1/families",
                                 headers={"Authorization": "Bearer not-a-token"})
    assert status == 401 and 'error="invalid_token"' in headers["www-authenticate"]
    for token in TOKENS:
        assert request(srv.url, "GET", "/v1/families",
                       headers={"Authorization": f"Bearer {token}"})[0] == 200
    assert request(srv.url, "GET", "/healthz")[0] == 200  # exempt by default


def test_oversize_body_refused_from_headers_alone(srv):
    """413 arrives although not one byte of the declared body was sent."""
    head = (f"POST /v1/fit HTTP/1.1\r\nHost: 127.0.0.1\r\nContent-Type: application/json\r\n"
            f"Authorization: Bearer {TOKENS[0]}\r\nContent-Length: {BODY_LIMIT * 50}\r\n"
            "\r\n").encode()
    started = time.monotonic()
    answer = raw_exchange(srv.port, head, timeout=10)
    elapsed = time.monotonic() - started
    status_line, _, rest = answer.partition(b"\r\n")
    assert status_line.startswith(b"HTTP/1.1 413"), answer[:300]
    assert b"application/problem+json" in rest
    body = json.loads(rest.split(b"\r\n\r\n", 1)[1])
    assert body["code"] == "body_too_large" and body["errors"]
    print(f"413 without the body in {elapsed * 1000:.1f} ms")


@pytest.mark.parametrize("name, payload", [
    ("nested past the parser's depth limit", b'{"x": ' + b"[" * 5000 + b"]" * 5000 + b"}"),
    ("nested deep inside a field", b'{"x": ' + b"[" * 1000 + b"1" + b"]" * 1000 + b', "y": [1]}'),
    ("nested objects", b'{"model": ' + b'{"a": ' * 1000 + b"1" + b"}" * 1000 + b"}"),
    ("number too large for a double", b'{"x": [1, 2, 1e999], "y": [1, 2, 3]}'),
    ("100,000-digit integer", b'{"x": [' + b"9" * 100_000 + b'], "y": [1]}'),
    ("negative huge exponent", b'{"x": [1, 2, -1e400], "y": [1, 2, 3]}'),
])
def test_hostile_json_is_a_quick_4xx(srv, name, payload):
    started = time.monotonic()
    status, headers, raw = request(srv.url, "POST", "/v1/fit", payload, headers=AUTH, timeout=10)
    elapsed = time.monotonic() - started
    assert 400 <= status < 500, (status, raw[:300])
    assert headers["content-type"] == "application/problem+json"
    if name != "nested deep inside a field" and name != "nested objects":
        assert status == 400, raw[:300]
    print(f"{name}: {status} in {elapsed * 1000:.1f} ms")


def _heavy_fit(n: int = 1_000_000) -> bytes:
    rng = np.random.default_rng(7)
    x = np.sort(rng.uniform(0.0, 10.0, n))
    y = 1.0 + x + rng.normal(0.0, 1.0, n)
    return orjson.dumps({"x": x, "y": y, "model": {"max_degree": 10, "select": "aic"}},
                        option=orjson.OPT_SERIALIZE_NUMPY)


def test_compute_deadline_stops_a_long_request_and_the_worker_is_replaced():
    # 1M points: decoding the 36 MB body alone takes longer than the 0.05 s budget
    env = {"CURVEWISE_REQUEST_TIMEOUT": "0.05", "CURVEWISE_MAX_BODY_BYTES": str(64 << 20)}
    with server(workers=2, env=env) as s:
        before = set(s.workers())
        started = time.monotonic()
        status, raw = post_while_reading(s.port, "/v1/fit", _heavy_fit())
        elapsed = time.monotonic() - started
        assert status == 503, raw[:300]
        assert json.loads(raw)["code"] == "timeout"
        # the interrupted worker retires gracefully and gunicorn starts a fresh one
        deadline = time.monotonic() + 20
        after = s.workers()
        while (len(after) != 2 or set(after) == before) and time.monotonic() < deadline:
            time.sleep(0.1)
            after = s.workers()
        assert len(set(after) - before) == 1, (before, after)
        assert request(s.url, "GET", "/healthz")[0] == 200
        print(f"503 after {elapsed:.2f} s with request_timeout 0.05 s")


def test_sigterm_lets_the_in_flight_request_finish():
    with server(workers=2) as s:
        body = json.dumps({"x": [1, 2, 3, 4, 5], "y": [1.1, 1.9, 3.2, 3.9, 5.1],
                           "model": {"degree": 1}}).encode()
        head = (f"POST /v1/fit HTTP/1.1\r\nHost: 127.0.0.1\r\nContent-Type: application/json"
                f"\r\nContent-Length: {len(body)}\r\n\r\n").encode()
        sock = socket.create_connection(("127.0.0.1", s.port), timeout=20)
        try:
            sock.sendall(head + body[:10])   # the request is now in flight on a worker
            time.sleep(0.5)
            os.kill(s.master, signal.SIGTERM)
            time.sleep(0.5)
            sock.sendall(body[10:])
            answer = b""
            while chunk := sock.recv(65536):
                answer += chunk
        finally:
            sock.close()
        assert answer.startswith(b"HTTP/1.1 200"), answer[:300]
        assert json.loads(answer.split(b"\r\n\r\n", 1)[1])["model"]["degree"] == 1
        deadline = time.monotonic() + 20
        while time.monotonic() < deadline:  # the master closed its listener on TERM
            try:
                request(s.url, "GET", "/healthz", timeout=1)
            except OSError:
                break
            time.sleep(0.1)
        else:
            pytest.fail("gunicorn still accepts connections 20 s after SIGTERM")


def test_kill_9_one_worker_under_load(metrics_dir):
    """Only requests in flight on the killed worker may fail; the rest keep being answered."""
    with server(workers=2, env={"CURVEWISE_MAX_REQUESTS": "0"}) as s:
        traffic = mixed_requests(s.url)
        counted_before = counter_total(s.url, "curvewise_http_requests_total")
        killed = {}

        def fault(elapsed):
            if elapsed >= 2.0 and not killed:
                victim = s.workers()[0]
                killed["pid"], killed["at"] = victim, elapsed
                os.kill(victim, signal.SIGKILL)

        result = run_load(s, traffic, seconds=6.0, connections=8, on_tick=fault)
        assert killed, "the fault was never injected"
        replacement = s.wait_workers(2, exclude=(killed["pid"],))
        assert killed["pid"] not in replacement
        # a sync worker has at most one request in flight; allow for one more accepted
        # connection racing the kill
        assert len(result.failures) <= 2, result.failures
        # ... and they were sent before the kill: nothing sent afterwards failed
        assert all(sent <= killed["at"] + 0.05 for sent, _, _ in result.failures), result.failures
        assert result.count(lambda st: st >= 500) == 0, result.statuses
        after_kill = [t for t, _, _ in result.latencies if t > killed["at"] + 0.5]
        assert len(after_kill) > 20, "the service stopped answering after the kill"
        assert request(s.url, "GET", "/healthz")[0] == 200
        # counters never go backwards: the dead worker's samples stay in the totals
        assert counter_total(s.url, "curvewise_http_requests_total") >= \
            counted_before + sum(result.statuses.values())
        print(f"kill -9 at {killed['at']:.1f} s: {sum(result.statuses.values())} answered, "
              f"{len(result.failures)} failed in flight, statuses {dict(result.statuses)}")
