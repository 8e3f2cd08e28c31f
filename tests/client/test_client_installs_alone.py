"""The client distribution installs and imports with the standard library alone."""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]

CHECK = """
import sys
sys.path.insert(0, {target!r})
import curvewise_client
from curvewise_client import Client, WSGITransport
assert curvewise_client.__file__.startswith({target!r}), curvewise_client.__file__
heavy = sorted(m for m in ("numpy", "flask", "werkzeug", "scipy", "statsmodels", "pandas",
                           "pyarrow",
                           "marshmallow", "service", "schemas") if m in sys.modules)
print("loaded:", heavy)
sys.exit(1 if heavy else 0)
"""


def test_client_builds_installs_and_imports_without_the_server_stack(tmp_path):
    target = tmp_path / "site"
    build = subprocess.run(
        [sys.executable, "-m", "pip", "install", "--quiet", "--no-deps", "--no-build-isolation",
         "--no-index", "--target", str(target), str(ROOT / "client")],
        capture_output=True, text=True, timeout=120)
    assert build.returncode == 0, build.stdout + build.stderr
    assert (target / "curvewise_client" / "client.py").exists()
    # -S: no site-packages at all, so flask/numpy could not be imported even by accident;
    # -I would also drop PYTHONPATH; we add the install target by hand instead.
    run = subprocess.run([sys.executable, "-S", "-c", CHECK.format(target=str(target))],
                         capture_output=True, text=True, timeout=60, cwd=tmp_path)
    assert run.returncode == 0, run.stdout + run.stderr
    assert "loaded: []" in run.stdout


def test_client_dependencies_are_declared_empty():
    import tomllib

    meta = tomllib.loads((ROOT / "client" / "pyproject.toml").read_text())["project"]
    assert meta["dependencies"] == []
    assert set(meta["optional-dependencies"]) == {"pandas", "arrow"}
