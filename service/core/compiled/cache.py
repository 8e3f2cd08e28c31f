"""Keep numba's on-disk cache of the compiled kernels consistent with their sources.

numba keys each cached function by its own source file only. A kernel that
calls a kernel from another module keeps the callee's old machine code when
only the callee's file changed (an upgrade over an existing cache, an edit in
development): stale numbers, or a crash. So a stamp, the SHA-256 of every
kernel module's source, is kept beside the cache; when it differs, every
kernel's cache index is flushed (numba compiles afresh on next use) and the
stamp is rewritten. A cache directory that cannot be written is left alone
(numba then has nothing cached there either).
"""

from __future__ import annotations

import hashlib
import importlib
from pathlib import Path

KERNEL_MODULES = ("batch.basis", "batch.curves_flags", "batch.curves_grid", "batch.curves_kernel",
                  "batch.curves_linearize", "batch.curves_linearize4", "batch.curves_models",
                  "batch.curves_models_extra", "batch.curves_multistart",
                  "batch.curves_multistart_grid",
                  "batch.curves_points", "batch.curves_solver", "batch.curves_solver4",
                  "batch.curves_starts",
                  "batch.ftail", "batch.kernel", "batch.kernel_steps", "batch.residuals",
                  "checks.kernels", "data.pair_summary",
                  "polynomial.compiled.bands",
                  "polynomial.compiled.checks", "polynomial.compiled.points",
                  "polynomial.compiled.qr", "polynomial.compiled.raw",
                  "polynomial.compiled.summary")
STAMP = "curvewise-kernels.sha256"


def _dispatchers(modules):
    for module in modules:
        for value in vars(module).values():
            cache = getattr(value, "_cache", None)
            if getattr(value, "__module__", None) == module.__name__ and hasattr(cache, "flush"):
                yield value


def ensure_fresh(modules=None) -> bool:
    """Flush every kernel's cached machine code if any kernel source changed; True if flushed.

    ``modules`` defaults to :data:`KERNEL_MODULES` of this package. Call it before
    the first kernel runs in a process (``service.core`` does, on import).
    """
    if modules is None:
        modules = [importlib.import_module(f"service.core.{name}") for name in KERNEL_MODULES]
    digest = hashlib.sha256()
    for module in modules:
        digest.update(Path(module.__file__).read_bytes())
    expected = digest.hexdigest()
    dispatchers = list(_dispatchers(modules))
    paths = {Path(d._cache._cache_path) for d in dispatchers
             if getattr(d._cache, "_cache_path", None)}
    if all(_read(path / STAMP) == expected for path in paths):
        return False
    for dispatcher in dispatchers:
        try:
            dispatcher._cache.flush()
        except OSError:   # a read-only cache directory: nothing of ours is cached there
            pass
    for path in paths:
        try:
            (path / STAMP).write_text(expected)
        except OSError:
            pass
    return True


def _read(path: Path) -> str | None:
    try:
        return path.read_text().strip()
    except OSError:
        return None
