"""On a cold numba cache, compile the batch kernels in a second process while the suite starts.

A fresh clone has no compiled kernels: the test process compiles the single-series
kernels itself while it collects (test modules fit at import), then the first live server
(:func:`tests.live_server.fill_kernel_cache`) compiled every batch kernel, over a minute,
with the machine's other core idle. :func:`start` runs
``warm_up_batch(); warm_up_series()`` in a child process from the start of the session
instead, so the batch kernels are compiled on the other core and the test process later
loads them from numba's on-disk cache (:func:`wait` first). Nothing is skipped or
faked: every kernel is compiled and run exactly as before, only on another core. With a
filled cache nothing starts.
"""

from __future__ import annotations

import subprocess
import sys
import tempfile
import warnings
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
CODE = ("from service.core.compiled.warmup import warm_up_batch, warm_up_series; "
        "warm_up_batch(); warm_up_series()")
_running: list[tuple[subprocess.Popen, object]] = []


def start() -> bool:
    """Start the child process if no kernel is cached yet; True if it started."""
    from service.runtime.kernel_cache import kernels_cached

    if kernels_cached():
        return False
    import service.core  # noqa: F401  (its stamp check may flush the cache: before the child writes)

    log = tempfile.TemporaryFile(mode="w+b")
    process = subprocess.Popen([sys.executable, "-c", CODE], cwd=ROOT, stdout=log,
                               stderr=subprocess.STDOUT, stdin=subprocess.DEVNULL)
    _running.append((process, log))
    return True


def wait(timeout: float = 600.0) -> None:
    """Wait (bounded) for the child. A failed child only means the caller compiles the
    kernels itself (and meets a broken warm-up there); its output is shown as a warning."""
    while _running:
        process, log = _running.pop()
        try:
            code = process.wait(timeout=timeout)
        except subprocess.TimeoutExpired:
            process.kill()
            process.wait()
            code = None
        log.seek(0)
        output = log.read().decode(errors="replace")[-4000:]
        log.close()
        if code != 0:
            warnings.warn(f"the kernel warm-up process failed (exit code {code}):\n{output}",
                          RuntimeWarning, stacklevel=2)


def stop() -> None:
    """End the child if it still runs (a short session): its cache files stay valid."""
    while _running:
        process, log = _running.pop()
        if process.poll() is None:
            process.terminate()
            try:
                process.wait(timeout=10)
            except subprocess.TimeoutExpired:
                process.kill()
                process.wait()
        log.close()
