"""Production gunicorn settings (``gunicorn -c python:service.runtime.gunicorn_conf``).

``curvewise serve`` loads this module and then applies its flags on top.
Numerical work is CPU-bound, so BLAS/OpenMP pools are pinned to one thread per
worker (set here, before any worker imports numpy) and the worker count
defaults to the number of usable cores.
"""

from __future__ import annotations

import logging
import os
import tempfile

from gunicorn import glogging

BLAS_THREAD_VARS = ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS",
                    "VECLIB_MAXIMUM_THREADS", "NUMEXPR_NUM_THREADS")
for _var in BLAS_THREAD_VARS:
    os.environ.setdefault(_var, "1")


def usable_cores() -> int:
    """CPUs this process may run on (respects affinity masks and containers' cpusets)."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except (AttributeError, OSError):  # pragma: no cover - non-Linux
        return max(1, os.cpu_count() or 1)


def default_workers() -> int:
    """One sync worker per usable core (CPU-bound work), at least two for overlap."""
    return max(2, usable_cores())


def _env_float(name: str, default: float) -> float:
    raw = os.environ.get(name)
    return float(raw) if raw not in (None, "") else default


wsgi_app = "service.app:create_app()"
_host = os.environ.get("CURVEWISE_HOST", "127.0.0.1")
bind = [f"{_host}:{os.environ.get('CURVEWISE_PORT', '8000')}"]
workers = int(os.environ.get("CURVEWISE_WORKERS") or 0) or default_workers()
worker_class = "sync"
# The app enforces request_timeout itself (a 503 problem); the hard kill comes a little later.
timeout = int(_env_float("CURVEWISE_REQUEST_TIMEOUT", 60.0)) + 30
graceful_timeout = 30          # seconds a worker gets to finish in-flight requests on SIGTERM
# Recycling workers now and then bounds slow leaks, but a worker takes 1-3 s to boot (numpy,
# scipy, statsmodels, Flask), so not often: at a few hundred requests a second, 50,000 is a
# restart every few minutes, not every few seconds. 0: never recycle.
max_requests = int(os.environ.get("CURVEWISE_MAX_REQUESTS", "50000"))
max_requests_jitter = max_requests // 10  # ... and not all workers at once
keepalive = 2
limit_request_line = 8190
limit_request_fields = 100
accesslog = None  # the app writes one JSON line per request (service.runtime.observability)
errorlog = "-"
loglevel = os.environ.get("CURVEWISE_LOG_LEVEL", "info").lower()
logconfig_dict = {  # gunicorn's own messages as JSON lines too (same shape as the app's)
    "version": 1, "disable_existing_loggers": False,
    "formatters": {"json": {"()": "service.runtime.logs.JsonFormatter"}},
    # gunicorn guesses "Perhaps out of memory?" for any SIGKILL; the filter says what is known
    "filters": {"worker_signals": {"()": "service.runtime.logs.WorkerSignalFilter"}},
    "handlers": {"stderr": {"class": "logging.StreamHandler", "formatter": "json",
                            "stream": "ext://sys.stderr", "filters": ["worker_signals"]}},
    "root": {"level": loglevel.upper(), "handlers": ["stderr"]},
    "loggers": {"gunicorn.error": {"level": loglevel.upper(), "handlers": ["stderr"],
                                   "propagate": False, "qualname": "gunicorn.error"},
                "gunicorn.access": {"level": "WARNING", "handlers": [], "propagate": False}},
}
forwarded_allow_ips = "127.0.0.1"


class AppAccessLogger(glogging.Logger):
    """gunicorn's logger, minus building access lines that are never written.

    The app writes one JSON access line per request (``service.runtime.observability``);
    ``gunicorn.access`` has no handler and level WARNING (``logconfig_dict`` above), yet
    gunicorn would still gather every line's fields before dropping it: about 5% of the
    worker's time on a small /v1/fit (cProfile of a worker under load).
    """

    def access(self, resp, req, environ, request_time):
        if self.access_log.isEnabledFor(logging.INFO):
            super().access(resp, req, environ, request_time)


logger_class = AppAccessLogger
proc_name = "curvewise"


# Prometheus multiprocess mode: every worker writes samples to PROMETHEUS_MULTIPROC_DIR and
# /metrics merges them. The directory must exist (and be empty) before any worker starts.
def on_starting(server):
    """Prepare an empty metrics directory for the workers (service.runtime.observability),
    note whether the kernels are cached (for the workers' first log line), and give this
    gunicorn its own control socket."""
    from service.runtime import kernel_cache  # before anything imports the core, which
    os.environ[kernel_cache.CACHED_ENV] = "1" if kernel_cache.kernels_cached() else "0"
    from service.runtime import observability  # may compile a kernel or two on import

    observability.prepare_multiprocess_dir()
    folder = tempfile.mkdtemp(prefix="curvewise-gunicorn-")
    _runtime_dirs.append(folder)
    os.environ[RUNTIME_DIR_ENV] = folder  # inherited by the workers
    _own_control_socket(server, folder)


CONTROL_SOCKET_ENV = "CURVEWISE_CONTROL_SOCKET"
# this instance's private folder (control socket, warm-up marker): on_starting makes it and
# passes it to the workers in the environment, on_exit removes it
RUNTIME_DIR_ENV = "CURVEWISE_RUNTIME_DIR"
_runtime_dirs: list[str] = []


def _own_control_socket(server, folder: str) -> None:
    """Point gunicorn's control socket (``gunicornc -s PATH``) at a path of this instance.

    gunicorn's default is one fixed path per user (``$XDG_RUNTIME_DIR/gunicorn.ctl`` or
    ``~/.gunicorn/gunicorn.ctl``): a second server on the machine would take it over from
    the first. Unless the operator chose a path (``CURVEWISE_CONTROL_SOCKET``, or
    ``--control-socket``) or turned it off (``--no-control-socket``), it goes into this
    instance's private temporary folder, removed again on exit; the path is logged at start.
    """
    from gunicorn.config import ControlSocket

    cfg = server.cfg
    if cfg.control_socket_disable:
        return
    path = os.environ.get(CONTROL_SOCKET_ENV)
    if not path and cfg.control_socket != ControlSocket.default:
        return  # --control-socket given
    path = path or os.path.join(folder, "gunicorn.ctl")
    cfg.set("control_socket", path)
    server.log.info("control socket: %s (gunicornc -s %s)", path, path)


def post_worker_init(worker):
    """Warm the compiled kernels up; at server start, in the background while answering.

    numba caches the machine code on disk: only the very first boot of an install
    compiles (about a minute; the container image does it at build time), later boots
    load it in a second or two. At server start every worker accepts connections at once
    and answers 503 ``warming_up`` with Retry-After until its kernels are ready
    (:mod:`service.runtime.warming`), so no connection waits in the listen queue for the
    compiler. A worker that replaces another (recycled after ``max_requests``, or after a
    crash) loads the kernels before it accepts, while the others serve: no 503s then.

    Then the objects alive after start-up (modules, the app, compiled code: some
    200,000) are moved out of the garbage collector's reach (``gc.freeze``): a full
    collection no longer walks them, which took ~0.28 ms off a 1.6 ms /v1/fit.
    """
    from pathlib import Path

    from service.runtime import warming

    folder = os.environ.get(RUNTIME_DIR_ENV)
    warming.start(freeze=True, marker=Path(folder) / "kernels-warm" if folder else None)


def child_exit(server, worker):
    """Drop a dead worker's live gauges; its counters keep counting in the totals."""
    from service.runtime import observability

    observability.mark_worker_dead(worker.pid)


def on_exit(server):
    """Remove the metrics directory (if on_starting made it) and the instance's folder."""
    import shutil

    from service.runtime import observability

    observability.remove_multiprocess_dir()
    for folder in _runtime_dirs:
        shutil.rmtree(folder, ignore_errors=True)
