"""Readiness at start: no connection waits for the kernels' compile.

A worker that is still warming its kernels answers 503 problem+json ``warming_up`` with
``Retry-After`` from /readyz and every route but liveness, then 200; ``make run`` and
``curvewise serve`` say what the first start does; two servers on one machine each get
their own gunicorn control socket. The warm-up is slowed with the test-only
``CURVEWISE_TEST_WARMUP_DELAY`` so the 503 window does not depend on the kernel cache.
"""

from __future__ import annotations

import os
import re
import shutil
import stat
import subprocess
import sys
import time
from pathlib import Path

import orjson
import pytest

from tests.live_server import ROOT, free_port, live_server
from tests.live_server import _stop as stop_server
from tests.ops.harness import request

FIT = {"x": [1.0, 2.0, 3.0, 4.0, 5.0], "y": [1.1, 1.9, 3.2, 3.9, 5.1], "model": {"degree": 1}}


def _first_answer(url: str, path: str, timeout: float) -> tuple[int, dict, bytes]:
    """The first HTTP answer on ``path`` (connections are refused until gunicorn binds)."""
    deadline = time.monotonic() + timeout
    while True:
        try:
            return request(url, "GET", path, timeout=5.0)
        except OSError:
            if time.monotonic() > deadline:
                raise
            time.sleep(0.05)


@pytest.mark.live
def test_a_warming_server_answers_503_with_retry_after_then_200(tmp_path):
    port = free_port()
    url = f"http://127.0.0.1:{port}"
    log_path = tmp_path / "server.log"
    env = {**os.environ, "PYTHONUNBUFFERED": "1", "CURVEWISE_TEST_WARMUP_DELAY": "4"}
    with open(log_path, "w+b") as log:
        process = subprocess.Popen(
            [sys.executable, "-m", "service.cli", "serve", "--host", "127.0.0.1",
             "--port", str(port), "--workers", "1"],
            cwd=ROOT, env=env, stdout=log, stderr=subprocess.STDOUT, stdin=subprocess.DEVNULL,
            start_new_session=True)
        try:
            status, headers, body = _first_answer(url, "/readyz", timeout=60.0)
            assert status == 503, body[:300]
            assert headers["content-type"] == "application/problem+json"
            assert int(headers["retry-after"]) > 0
            problem = orjson.loads(body)
            assert problem["code"] == "warming_up" and problem["status"] == 503
            assert problem["type"] == "/problems/warming_up" and "/readyz" in problem["detail"]
            fit_status, fit_headers, fit_body = request(url, "POST", "/v1/fit", FIT)
            assert fit_status == 503 and "retry-after" in fit_headers
            assert orjson.loads(fit_body)["code"] == "warming_up"
            assert request(url, "GET", "/healthz")[0] == 200  # liveness: the process is up
            assert request(url, "GET", "/problems/warming_up")[0] == 200
            deadline = time.monotonic() + 120.0
            while (status := request(url, "GET", "/readyz")[0]) == 503:
                assert time.monotonic() < deadline, "never became ready"
                time.sleep(0.2)
            assert status == 200
            fit_status, _, fit_body = request(url, "POST", "/v1/fit", FIT)
            assert fit_status == 200, fit_body[:300]
        finally:
            stop_server(process)
    text = log_path.read_text(errors="replace")
    assert "curvewise: serving http://127.0.0.1:" in text
    assert '"event":"kernels_ready"' in text


CONTROL = re.compile(r"control socket: (\S+) \(gunicornc")


@pytest.mark.live
def test_two_servers_have_their_own_control_sockets(tmp_path):
    logs = (tmp_path / "a.log", tmp_path / "b.log")
    with live_server(workers=1, log_path=logs[0]), live_server(workers=1, log_path=logs[1]):
        paths = [Path(CONTROL.search(log.read_text()).group(1)) for log in logs]
        assert paths[0] != paths[1]
        for path in paths:
            assert stat.S_ISSOCK(path.stat().st_mode)
            assert stat.S_IMODE(path.parent.stat().st_mode) == 0o700  # a private folder
    assert not any(path.parent.exists() for path in paths)  # removed on exit


def test_serve_says_when_it_compiles_the_kernels(tmp_path, monkeypatch):
    from service.cli import announce

    monkeypatch.delenv("CURVEWISE_KERNELS_CACHED", raising=False)  # as before gunicorn starts
    monkeypatch.setenv("NUMBA_CACHE_DIR", str(tmp_path))  # an empty cache: a cold start
    text = announce("127.0.0.1", 8080, 2)
    assert "compiling numerical kernels, about a minute the first time" in text
    assert "http://127.0.0.1:8080/" in text and "503" in text
    (tmp_path / "kernels.fit-12.py311.nbi").write_bytes(b"")  # an index file: cached
    assert "compiling" not in announce("127.0.0.1", 8080, 2)


def test_make_run_takes_the_port():
    if shutil.which("make") is None:
        pytest.skip("make is not installed")
    make = subprocess.run(["make", "-n", "run", "PORT=8123"], cwd=ROOT, capture_output=True,
                          text=True, timeout=60)
    assert "serve --host 127.0.0.1 --port 8123" in make.stdout
    default = subprocess.run(["make", "-n", "run"], cwd=ROOT, capture_output=True, text=True,
                             timeout=60, env={k: v for k, v in os.environ.items() if k != "PORT"})
    assert "--port 8000" in default.stdout


def test_a_lagging_worker_holds_requests_once_another_worker_is_warm(tmp_path, monkeypatch):
    # In process, as in one gunicorn worker: while its own warm-up runs (slowed by the test
    # hook) it refuses with 503; once the server's marker says another worker is warm, it
    # holds the request until its own kernels are loaded and answers it.
    from service.app import create_app
    from service.runtime import warming

    monkeypatch.setenv(warming.DELAY_ENV, "1.5")
    client = create_app().test_client()
    marker = tmp_path / "kernels-warm"
    thread = warming.start(freeze=False, marker=marker)
    try:
        refused = client.get("/readyz")
        assert refused.status_code == 503 and refused.headers["Retry-After"]
        assert refused.get_json()["code"] == "warming_up"
        assert client.get("/healthz").status_code == 200
        marker.touch()  # another worker of this server is warm now
        assert client.get("/readyz").status_code == 200  # held, then answered
        assert not warming.warming()
    finally:
        thread.join(120)
        warming._warmth = None  # this test process is not a warming worker
