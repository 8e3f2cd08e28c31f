"""A real gunicorn server for tests: ``with live_server() as base_url: ...``.

Starts ``python -m service.cli serve`` on a free loopback port, waits (bounded)
until ``/readyz`` answers 200, yields the base URL and always stops the
server (SIGTERM to its process group, then SIGKILL after a grace period).
``tests/conftest.py`` exposes it as the session fixture ``live_url``.

Before the first server starts, :func:`fill_kernel_cache` compiles the numerical kernels
once in the test process (numba writes them to its on-disk cache): otherwise on a fresh
clone every server in the run would compile them itself on start, two workers at once,
which takes over a minute on two cores and can outlast any reasonable startup bound.
"""

from __future__ import annotations

import os
import signal
import socket
import subprocess
import sys
import tempfile
import time
import urllib.error
import urllib.request
from contextlib import contextmanager
from functools import cache
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent


def free_port() -> int:
    """A TCP port on 127.0.0.1 that was free a moment ago."""
    with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as sock:
        sock.bind(("127.0.0.1", 0))
        return sock.getsockname()[1]


@cache
def fill_kernel_cache() -> None:
    """Compile (or load) every compiled kernel once in this process, filling numba's cache
    (after the session's warm-up process, if one runs: its kernels then load)."""
    from service.core.compiled.warmup import warm_up
    from tests import kernel_prefill

    kernel_prefill.wait()
    warm_up()


def _ready(url: str) -> bool:
    try:
        with urllib.request.urlopen(url, timeout=1.0) as response:
            return response.status == 200
    except (urllib.error.URLError, ConnectionError, TimeoutError, OSError):
        return False


@contextmanager
def live_server(*, workers: int = 2, env: dict | None = None, startup_timeout: float = 30.0,
                extra_args: tuple[str, ...] = (), log_path: Path | None = None):
    """Run gunicorn on 127.0.0.1:<free port>; yield ``"http://127.0.0.1:<port>"``.

    ``env`` adds/overrides environment variables (e.g. ``{"CURVEWISE_MAX_POINTS": "100"}``).
    The server's combined output is kept in a temporary file (``log_path``, when given, for
    the test to read) and shown if startup fails.
    """
    fill_kernel_cache()
    port = free_port()
    base_url = f"http://127.0.0.1:{port}"
    command = [sys.executable, "-m", "service.cli", "serve", "--host", "127.0.0.1",
               "--port", str(port), "--workers", str(workers), *extra_args]
    child_env = {**os.environ, "PYTHONUNBUFFERED": "1", **(env or {})}
    log = tempfile.TemporaryFile(mode="w+b") if log_path is None else open(log_path, "w+b")
    process = subprocess.Popen(command, cwd=ROOT, env=child_env, stdout=log,
                               stderr=subprocess.STDOUT, stdin=subprocess.DEVNULL,
                               start_new_session=True)
    try:
        deadline = time.monotonic() + startup_timeout
        while not _ready(base_url + "/readyz"):
            if process.poll() is not None or time.monotonic() > deadline:
                log.seek(0)
                output = log.read().decode(errors="replace")[-4000:]
                raise RuntimeError(f"gunicorn did not become ready at {base_url} "
                                   f"(exit code {process.poll()}):\n{output}")
            time.sleep(0.1)
        yield base_url
    finally:
        _stop(process)
        log.close()


def _stop(process: subprocess.Popen, grace: float = 15.0) -> None:
    if process.poll() is None:
        try:
            os.killpg(process.pid, signal.SIGTERM)  # the group we created: master and its workers
        except ProcessLookupError:
            pass
        try:
            process.wait(timeout=grace)
        except subprocess.TimeoutExpired:
            try:
                os.killpg(process.pid, signal.SIGKILL)
            except ProcessLookupError:
                pass
            process.wait(timeout=5)
