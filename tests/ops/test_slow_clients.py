"""Slow clients: why the README recommends a buffering proxy, and that it works.

gunicorn's documentation (deploy section) says sync workers need a buffering proxy in front
because a slow client holds a sync worker; nginx's proxy_request_buffering reads the whole
request before contacting the upstream (nginx ngx_http_proxy_module documentation). The nginx
configuration used here is the one printed in docs/operations.md.
"""

from __future__ import annotations

import os
import re
import shutil
import socket
import subprocess
import threading
import time
from contextlib import contextmanager
from pathlib import Path

import pytest

from tests.live_server import free_port
from tests.ops.harness import request, server

pytestmark = pytest.mark.live
ROOT = Path(__file__).resolve().parents[2]
FETCH = Path(__file__).with_name("fetch_nginx.sh")


def nginx_binary() -> str:
    found = os.environ.get("CURVEWISE_TEST_NGINX") or shutil.which("nginx")
    if found:
        return found
    try:
        out = subprocess.run(["bash", str(FETCH)], capture_output=True, text=True, timeout=180)
    except subprocess.TimeoutExpired:
        out = None
    if out is not None and out.returncode == 0 and Path(out.stdout.strip()).exists():
        return out.stdout.strip()
    reason = "nginx unavailable: " + (out.stderr.strip() if out else "fetch timed out")
    if os.environ.get("CI"):
        pytest.fail(reason)  # CI must run this check
    pytest.skip(reason)


def documented_config() -> str:
    text = (ROOT / "docs" / "operations.md").read_text()
    block = re.search(r"```nginx\n(.*?)```", text, re.S)
    assert block, "docs/operations.md lost its nginx block"
    return block.group(1)


@contextmanager
def nginx_in_front(upstream_port: int, tmp_path: Path):
    port = free_port()
    config = documented_config()
    assert "listen 127.0.0.1:8080;" in config and "server 127.0.0.1:8000;" in config
    config = config.replace("listen 127.0.0.1:8080;", f"listen 127.0.0.1:{port};")
    config = config.replace("server 127.0.0.1:8000;", f"server 127.0.0.1:{upstream_port};")
    config = config.replace("worker_processes auto;", "worker_processes 1;")
    temp = "".join(f"    {kind}_temp_path {tmp_path}/{kind};\n"
                   for kind in ("client_body", "proxy", "fastcgi", "uwsgi", "scgi"))
    config = config.replace("http {\n", "http {\n" + temp, 1)
    conf = tmp_path / "nginx.conf"
    conf.write_text(config)
    main = f"daemon off; pid {tmp_path}/nginx.pid;" + (" user root;" if os.geteuid() == 0 else "")
    process = subprocess.Popen([nginx_binary(), "-p", str(tmp_path), "-e", "stderr", "-c",
                                str(conf), "-g", main], stdout=subprocess.DEVNULL,
                               stderr=subprocess.PIPE, start_new_session=True)
    try:
        deadline = time.monotonic() + 15
        while True:
            try:
                if request(f"http://127.0.0.1:{port}", "GET", "/healthz", timeout=2)[0] == 200:
                    break
            except OSError:
                pass
            assert process.poll() is None, process.stderr.read().decode()[-2000:]
            assert time.monotonic() < deadline, "nginx never proxied /healthz"
            time.sleep(0.1)
        yield port
    finally:
        process.terminate()
        try:
            process.wait(timeout=10)
        except subprocess.TimeoutExpired:
            process.kill()
            process.wait(timeout=5)


class Trickle:
    """``count`` connections each sending a request one byte every ``gap`` s, for ``seconds``."""

    def __init__(self, port: int, count: int, seconds: float, gap: float = 0.2,
                 body: bool = False) -> None:
        self.port, self.count, self.seconds, self.gap, self.body = port, count, seconds, gap, body
        self.stop = threading.Event()
        self.opened = 0
        self.threads = [threading.Thread(target=self._run, daemon=True) for _ in range(count)]

    def _run(self) -> None:
        payload = b'{"x": [1, 2, 3], "y": [1, 2, 3]}' + b" " * 4000
        head = b"POST /v1/fit HTTP/1.1\r\nHost: 127.0.0.1\r\nContent-Type: application/json\r\n"
        if self.body:  # complete headers, then the body a byte at a time
            first, rest = head + f"Content-Length: {len(payload)}\r\n\r\n".encode(), payload
        else:          # the headers themselves, a byte at a time
            first, rest = b"", head + b"X-Padding: " + b"a" * 4000
        deadline = time.monotonic() + self.seconds
        try:
            with socket.create_connection(("127.0.0.1", self.port), timeout=5) as sock:
                self.opened += 1
                sock.sendall(first)
                for i in range(len(rest)):
                    if self.stop.is_set() or time.monotonic() > deadline:
                        return
                    sock.sendall(rest[i:i + 1])
                    time.sleep(self.gap)
        except OSError:
            return

    def __enter__(self):
        for t in self.threads:
            t.start()
        time.sleep(0.5)  # let them connect and start trickling
        return self

    def __exit__(self, *exc):
        self.stop.set()
        for t in self.threads:
            t.join(timeout=10)


def answered_within(url: str, count: int, timeout: float) -> list:
    outcomes = []
    for _ in range(count):
        try:
            outcomes.append(request(url, "GET", "/healthz", timeout=timeout)[0])
        except OSError as exc:
            outcomes.append(type(exc).__name__)
    return outcomes


@pytest.fixture(scope="module")
def srv():
    with server(workers=2) as s:
        yield s


def test_bare_sync_workers_are_stalled_by_two_slow_clients(srv):
    """Why the proxy is recommended: each trickling connection holds one sync worker."""
    with Trickle(srv.port, count=2, seconds=4.0):
        stalled = answered_within(srv.url, 1, timeout=2.0)
    assert stalled == ["TimeoutError"], stalled
    assert answered_within(srv.url, 3, timeout=10.0) == [200, 200, 200]  # free again


@pytest.mark.parametrize("slow_part", ["headers", "body"])
def test_buffering_proxy_keeps_serving_while_many_clients_trickle(srv, tmp_path, slow_part):
    with nginx_in_front(srv.port, tmp_path) as proxy_port:
        proxied = f"http://127.0.0.1:{proxy_port}"
        with Trickle(proxy_port, count=20, seconds=4.0, body=slow_part == "body") as trickle:
            outcomes = answered_within(proxied, 30, timeout=3.0)
            assert trickle.opened == 20
        assert outcomes == [200] * 30, outcomes
        status, headers, _ = request(proxied, "GET", "/healthz", headers={"X-Request-ID": "r-1"})
        assert status == 200 and headers["x-request-id"] == "r-1"  # ids pass through nginx


class HeaderTrickle:
    """``count`` connections trickling request headers one byte every ``gap`` s until the
    peer closes them or ``seconds`` pass; records how long each stayed open."""

    def __init__(self, port: int, count: int, seconds: float, gap: float = 0.5) -> None:
        self.port, self.count, self.seconds, self.gap = port, count, seconds, gap
        self.open_for: list[float] = []
        self.lock = threading.Lock()
        self.threads = [threading.Thread(target=self._run, daemon=True) for _ in range(count)]

    def _run(self) -> None:
        head = b"POST /v1/fit HTTP/1.1\r\nHost: 127.0.0.1\r\nX-Padding: " + b"a" * 4000
        started = time.monotonic()
        try:
            with socket.create_connection(("127.0.0.1", self.port), timeout=5) as sock:
                for i in range(len(head)):
                    if time.monotonic() - started > self.seconds:
                        break
                    sock.sendall(head[i:i + 1])
                    time.sleep(self.gap)
        except OSError:
            pass  # the peer closed the connection: that is what is measured
        with self.lock:
            self.open_for.append(time.monotonic() - started)

    def __enter__(self):
        for t in self.threads:
            t.start()
        time.sleep(0.5)
        return self

    def __exit__(self, *exc):
        for t in self.threads:
            t.join(timeout=self.seconds + 10)


def test_header_trickling_clients_are_dropped_by_the_proxy_and_never_hold_a_worker(
        srv, tmp_path):
    """8 clients trickle headers past nginx's client_header_timeout (10 s in the documented
    configuration): every other request is answered meanwhile, and nginx drops each trickler
    at its timeout. Bare, each would hold a sync worker until gunicorn's own timeout (90 s by
    default), which is why the proxy is prescribed (test above)."""
    config = documented_config()
    header_timeout = float(re.search(r"client_header_timeout (\d+)s;", config).group(1))
    with nginx_in_front(srv.port, tmp_path) as proxy_port:
        proxied = f"http://127.0.0.1:{proxy_port}"
        with HeaderTrickle(proxy_port, count=8, seconds=header_timeout + 5) as trickle:
            outcomes = []
            for _ in range(20):  # spread over the trickle: about 10 s
                outcomes += answered_within(proxied, 1, timeout=3.0)
                time.sleep(0.5)
        assert outcomes == [200] * 20, outcomes
        assert len(trickle.open_for) == 8
        # dropped at the timeout (plus one trickle gap to notice), long before the end
        assert all(header_timeout - 1 <= t <= header_timeout + 2.5 for t in trickle.open_for), \
            trickle.open_for
