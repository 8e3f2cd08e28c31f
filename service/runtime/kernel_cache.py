"""Whether numba's on-disk cache of the compiled kernels looks filled, checked without
importing numba or numpy (so ``curvewise serve`` can say what the first start will do)."""

from __future__ import annotations

import os
from pathlib import Path

CORE_DIR = Path(__file__).resolve().parents[1] / "core"
COLD_MESSAGE = "compiling numerical kernels, about a minute the first time"
WARM_MESSAGE = "loading the compiled numerical kernels, a second or two"
CACHED_ENV = "CURVEWISE_KERNELS_CACHED"  # set by the gunicorn master at start: "1" or "0"


def kernels_cached() -> bool:
    """True when numba's cache index files exist (beside the core's modules, or under
    ``NUMBA_CACHE_DIR``): the kernels will load, not compile."""
    cache_dir = os.environ.get("NUMBA_CACHE_DIR")
    root = Path(cache_dir) if cache_dir else CORE_DIR
    return root.is_dir() and any(root.rglob("*.nbi"))


def startup_message() -> str:
    """What a starting server is about to do with its kernels (as the master found the cache
    at start, when it said: importing the core may already have compiled a kernel or two)."""
    said = os.environ.get(CACHED_ENV)
    cached = kernels_cached() if said is None else said == "1"
    return WARM_MESSAGE if cached else COLD_MESSAGE
