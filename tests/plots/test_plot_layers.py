"""service.plots is fed by the core only and uses matplotlib's object API, never pyplot."""

from __future__ import annotations

import ast
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]

CHECK = """
import sys
import numpy as np
from service.core import fit_series
from service.plots import PANELS, PlotOptions, render
x = np.linspace(0, 1, 20)
png = render(fit_series(x, x ** 2 + np.sin(9 * x) / 10), x, x ** 2 + np.sin(9 * x) / 10,
             None, PlotOptions(panels=PANELS))
bad = [m for m in ("matplotlib.pyplot", "flask", "werkzeug", "marshmallow", "schemas")
       if m in sys.modules]
print(bad, png[:4])
sys.exit(1 if bad or not png.startswith(b"\\x89PNG") else 0)
"""


def test_plots_import_only_the_core_and_matplotlib_objects():
    names = set()
    for path in (ROOT / "service" / "plots").rglob("*.py"):
        for node in ast.walk(ast.parse(path.read_text())):
            if isinstance(node, ast.Import):
                names.update(alias.name for alias in node.names)
            elif isinstance(node, ast.ImportFrom) and node.module and node.level == 0:
                names.add(node.module)
    assert "matplotlib.pyplot" not in names
    assert not {n.split(".")[0] for n in names} & {"flask", "werkzeug", "schemas",
                                                   "marshmallow"}
    assert not {n for n in names if n.startswith("service.") and
                not n.startswith(("service.core", "service.plots"))}


def test_rendering_every_panel_loads_neither_pyplot_nor_the_web_stack():
    run = subprocess.run([sys.executable, "-c", CHECK], cwd=ROOT, capture_output=True,
                         text=True, timeout=120, env={"PATH": "/usr/bin:/bin"})
    assert run.returncode == 0, run.stdout + run.stderr[-2000:]
