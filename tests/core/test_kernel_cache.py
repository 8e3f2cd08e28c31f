"""numba's cache and kernels that call kernels in other modules.

numba keys a cached function by its own source file (its documented behaviour), so a
caller keeps the callee's old machine code when only the callee's file changes. The
stamp in :mod:`service.core.compiled.cache` flushes the cache when any kernel source
changed. Each step runs in a fresh interpreter, as a new server process would.
"""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
CALLEE = "import numba\n@numba.njit(cache=True)\ndef callee(x):\n    return x + {k}\n"
CALLER = ("import numba\nfrom callee_mod import callee\n@numba.njit(cache=True)\n"
          "def caller(x):\n    return callee(x) * 10\n")


def _run(tmp_path, flush: bool) -> list[str]:
    code = (f"import sys; sys.path.insert(0, {str(tmp_path)!r}); import callee_mod, caller_mod; "
            "from service.core.compiled.cache import ensure_fresh; "
            + ("print(ensure_fresh([callee_mod, caller_mod])); " if flush else "")
            + "print(caller_mod.caller(1))")
    out = subprocess.run([sys.executable, "-c", code], cwd=ROOT, capture_output=True, text=True,
                         timeout=120)
    assert out.returncode == 0, out.stderr
    return out.stdout.split()


def test_a_changed_callee_is_recompiled_after_the_stamp_check(tmp_path):
    (tmp_path / "callee_mod.py").write_text(CALLEE.format(k=1))
    (tmp_path / "caller_mod.py").write_text(CALLER)
    assert _run(tmp_path, flush=True) == ["True", "20"]       # first run: no stamp yet
    (tmp_path / "callee_mod.py").write_text(CALLEE.format(k=2) + "# edited\n")
    assert _run(tmp_path, flush=False) == ["20"]              # numba alone: stale (was 30)
    assert _run(tmp_path, flush=True) == ["True", "30"]       # stamp differs: flushed
    assert _run(tmp_path, flush=True) == ["False", "30"]      # unchanged: cache kept


def test_the_core_kernels_carry_a_current_stamp():
    from service.core.compiled import cache as kernel_cache

    assert kernel_cache.ensure_fresh() is False   # service.core checked it on import


def test_every_module_with_compiled_kernels_is_stamped():
    from service.core.compiled import cache as kernel_cache

    core = ROOT / "service" / "core"
    compiled = {".".join(p.relative_to(core).with_suffix("").parts) for p in core.rglob("*.py")
                if "numba.njit" in p.read_text()}
    assert compiled == set(kernel_cache.KERNEL_MODULES)
