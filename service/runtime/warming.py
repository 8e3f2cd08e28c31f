"""Readiness while the numerical kernels load: accept at once, answer 503 until warm.

The core's loops are compiled by numba and cached on disk
(:mod:`service.core.compiled.warmup`): the first start of an install compiles them (about a
minute on two cores), later starts load the cached machine code (a second or two). A request
must never wait for that in a listen queue. So a gunicorn worker calls :func:`start` in
``post_worker_init``: the kernels warm up in a background thread while the worker already
accepts connections, and until they are ready every request gets a ``503`` problem+json
(code ``warming_up``) with ``Retry-After``; ``/readyz`` too, then ``200``. Three paths are
served all along: the liveness probe ``/healthz`` (the process is alive; an orchestrator must
not restart it for compiling), ``/metrics`` and the problem pages under ``/problems/``.

Readiness belongs to the server, not to one worker: once any worker is warm (the instance's
marker file exists), a worker still warming holds a request until it is warm itself (its
warm-up started at the same moment, so that is the time between the first worker and the
last) rather than refusing it; a worker replacing another warms up before it accepts.

After the warm-up, the objects alive (modules, the app, compiled code) are moved out of the
garbage collector's reach (``gc.freeze``): a full collection no longer walks them.

In a process that never called :func:`start` (the tests' in-process app, an embedding
program) nothing is gated. ``CURVEWISE_TEST_WARMUP_DELAY`` (seconds, tests only) delays the
warm-up, to see the 503s on a machine whose kernel cache is already filled.
"""

from __future__ import annotations

import gc
import logging
import os
import threading
import time
from pathlib import Path

from flask import Flask, request

from service.http.errors import problem
from service.http.problems import ProblemKind, register_kind
from service.runtime.kernel_cache import startup_message

RETRY_AFTER_SECONDS = 5
WAIT_WHEN_OTHERS_SERVE = 30.0  # seconds a request waits for a worker that lags the others
DELAY_ENV = "CURVEWISE_TEST_WARMUP_DELAY"
SERVED_WHILE_WARMING = frozenset({"/healthz", "/metrics"})  # and the pages under /problems/
log = logging.getLogger("curvewise.warmup")

register_kind(ProblemKind(
    "warming_up", 503, "Warming up",
    "The server has just started and is still compiling or loading its numerical kernels "
    "(about a minute the first time after an install, a second or two later).",
    "Retry after the seconds in the Retry-After header; GET /readyz answers 200 once ready."))


class _Warmth:
    """This process's warm-up: when it started, whether it has finished, and the instance's
    marker file (present once any worker of this server is warm)."""

    def __init__(self, marker: Path | None) -> None:
        self.started = time.monotonic()
        self.done = threading.Event()
        self.marker = marker

    def others_serve(self) -> bool:
        """Whether another worker of this server is warm already (the server is ready)."""
        return self.marker is not None and self.marker.exists()


_warmth: _Warmth | None = None


def start(*, freeze: bool = True, marker: Path | None = None) -> threading.Thread | None:
    """Warm the kernels up; requests get 503 ``warming_up`` until it has finished.

    Parameters
    ----------
    freeze : bool
        Collect, then ``gc.freeze()`` the objects alive once the kernels are loaded.
    marker : Path, optional
        A file this server instance shares between its workers, created once one of them
        is warm. When it exists already, this process replaces a worker of a running server
        (recycled or restarted): it warms up *before* taking connections (a second or two
        from the cache) while the others serve, and no request sees a 503. Otherwise the
        warm-up runs in a background thread and this process answers 503 meanwhile.

    Returns
    -------
    threading.Thread or None
        The background thread, or None when the warm-up ran here and is done.
    """
    global _warmth
    warmth = _warmth = _Warmth(marker)
    if warmth.others_serve():
        _warm(warmth, freeze, marker)
        return None
    log.info("%s; answering 503 (Retry-After) until ready", startup_message())
    thread = threading.Thread(target=_warm, args=(warmth, freeze, marker),
                              name="curvewise-warm-up", daemon=True)
    thread.start()
    return thread


def _warm(warmth: _Warmth, freeze: bool, marker: Path | None) -> None:
    try:
        delay = float(os.environ.get(DELAY_ENV) or 0)
        if delay > 0:
            time.sleep(delay)
        from service.core.compiled.warmup import warm_up

        warm_up()
        if freeze:
            gc.collect()
            gc.freeze()
    except Exception:  # serve anyway: a kernel then compiles on first use, errors surface
        log.exception("the numerical kernels' warm-up failed; serving without it")
    finally:
        if marker is not None:  # before done: a worker answering 200 implies the marker
            try:
                marker.touch()
            except OSError:
                pass
        warmth.done.set()
        seconds = time.monotonic() - warmth.started
        record = logging.LogRecord(log.name, logging.INFO, __file__, 0,
                                   "numerical kernels ready after %.1f s", (seconds,), None)
        record.fields = {"event": "kernels_ready", "seconds": round(seconds, 3)}
        log.handle(record)


def warming() -> bool:
    """Whether this process started a warm-up that has not finished yet."""
    return _warmth is not None and not _warmth.done.is_set()


def wait(timeout: float | None = None) -> bool:
    """Wait (bounded by ``timeout`` seconds) for this process's warm-up; True once warm."""
    return _warmth is None or _warmth.done.wait(timeout)


def install(app: Flask) -> None:
    """Answer 503 ``warming_up`` (with Retry-After) while this process's kernels warm up."""

    @app.before_request
    def _warming_up():
        if _warmth is None or _warmth.done.is_set():
            return None
        path = request.path
        if path in SERVED_WHILE_WARMING or path.startswith("/problems/"):
            return None
        if _warmth.others_serve() and _warmth.done.wait(WAIT_WHEN_OTHERS_SERVE):
            return None  # the server is ready: this worker is moments behind the first one
        detail = ("The server has just started and is still compiling or loading its numerical "
                  "kernels (about a minute the first time after an install). Retry in "
                  f"{RETRY_AFTER_SECONDS} s; GET /readyz answers 200 once ready.")
        return problem(503, None, detail, code="warming_up",
                       headers={"Retry-After": str(RETRY_AFTER_SECONDS)})
