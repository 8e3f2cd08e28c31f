"""Architecture guard: layers point one way (service.api -> schemas, service.core)."""

from __future__ import annotations

import ast
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent


def _imports(package: Path) -> set[str]:
    names: set[str] = set()
    for path in package.rglob("*.py"):
        tree = ast.parse(path.read_text(), filename=str(path))
        for node in ast.walk(tree):
            if isinstance(node, ast.Import):
                names.update(alias.name for alias in node.names)
            elif isinstance(node, ast.ImportFrom) and node.module and node.level == 0:
                names.add(node.module)
    return names


def _top(names: set[str]) -> set[str]:
    return {name.split(".")[0] for name in names}


def test_core_imports_no_web_or_schema_code():
    imported = _imports(ROOT / "service" / "core")
    assert not _top(imported) & {"flask", "flask_smorest", "marshmallow", "webargs", "schemas",
                                 "werkzeug", "apispec"}
    outside_core = {n for n in imported
                    if n.startswith("service.") and not n.startswith("service.core")}
    assert not outside_core


def test_schemas_import_nothing_from_service_or_numerics_internals():
    imported = _top(_imports(ROOT / "schemas"))
    assert not imported & {"service", "flask", "flask_smorest", "werkzeug", "scipy", "statsmodels"}


def test_client_imports_nothing_from_the_server():
    imported = _top(_imports(ROOT / "client" / "curvewise_client"))
    assert not imported & {"service", "schemas", "flask", "numpy", "scipy", "statsmodels",
                           "marshmallow"}


def test_core_loads_without_flask_or_marshmallow_in_a_fresh_interpreter():
    code = ("import sys, service.core; "
            "bad = [m for m in ('flask', 'marshmallow', 'werkzeug', 'schemas') "
            "if m in sys.modules]; "
            "print(bad); sys.exit(1 if bad else 0)")
    result = subprocess.run([sys.executable, "-c", code], cwd=ROOT, capture_output=True, text=True)
    assert result.returncode == 0, result.stdout + result.stderr


# Inside the core, floors from bottom to top; a module may import its own floor and below.
# Family folders (one per family) sit on one floor and never import each other.
CORE_FLOORS = (
    {"errors", "results", "spec", "compiled", "compiled.cache", "interrupt"},
    {"data"},
    {"checks"},
    {"polynomial", "nonlinear"},
    {"models"},
    {"families", "compare"},
    {"batch"},
    {"compiled.warmup", "__init__"},
)
FAMILY_FOLDERS = {"polynomial", "nonlinear"}


def _room(module: str) -> str:
    """The floor key of a dotted name inside service.core (``polynomial.fit`` -> polynomial)."""
    for key in sorted(set().union(*CORE_FLOORS), key=len, reverse=True):  # longest match
        if module == key or module.startswith(key + "."):
            return key
    raise AssertionError(f"service.core.{module} is on no floor of CORE_FLOORS")


def _targets(node: ast.AST) -> list[str]:
    """Every dotted name an import statement reaches (``from a import b`` gives ``a`` and
    ``a.b``; ``from service import config`` gives ``service.config``)."""
    if isinstance(node, ast.ImportFrom) and node.module and node.level == 0:
        return [node.module] + [f"{node.module}.{a.name}" for a in node.names]
    if isinstance(node, ast.Import):
        return [a.name for a in node.names]
    return []


def _floor(room: str) -> int:
    return next(i for i, floor in enumerate(CORE_FLOORS) if room in floor)


def test_core_imports_point_down_its_floors():
    core = ROOT / "service" / "core"
    wrong = []
    for path in core.rglob("*.py"):
        parts = path.relative_to(core).with_suffix("").parts
        name = ".".join(p for p in parts if p != "__init__") or "__init__"
        here = _room(name)
        tree = ast.parse(path.read_text(), filename=str(path))
        for node in ast.walk(tree):
            for target in _targets(node):
                if not target.startswith("service.core."):
                    continue
                there = target.removeprefix("service.core.")
                try:
                    room = _room(there)
                except AssertionError:
                    continue  # an attribute (service.core.x.name), judged by its module
                sibling = room != here and {room, here} <= FAMILY_FOLDERS
                if _floor(room) > _floor(here) or sibling:
                    wrong.append(f"{name} imports {there}")
    assert not wrong, "imports that point up (or across family folders):\n" + "\n".join(wrong)


# Around the core, the service's own floors from bottom to top: settings, then the plumbing
# and figures, the process (guards, metrics, logs), the views, the app factory, the command.
SERVICE_FLOORS = (
    {"core"},
    {"config"},
    {"http", "plots"},
    {"runtime"},
    {"api"},
    {"app"},
    {"cli"},
)


def _service_floor(module: str) -> int:
    """The floor of ``service.<room>...`` (its first component), by SERVICE_FLOORS."""
    room = module.split(".")[0]
    return next(i for i, floor in enumerate(SERVICE_FLOORS) if room in floor)


def test_service_imports_point_down_its_floors():
    service = ROOT / "service"
    wrong = []
    for path in service.rglob("*.py"):
        parts = path.relative_to(service).with_suffix("").parts
        if parts == ("__init__",):
            continue
        here = _service_floor(parts[0])
        tree = ast.parse(path.read_text(), filename=str(path))
        for node in ast.walk(tree):
            for target in _targets(node):
                if target.startswith("service.") and target != "service.__version__" \
                        and _service_floor(target.removeprefix("service.")) > here:
                    wrong.append(f"{'/'.join(parts)} imports {target}")
    assert not wrong, "imports that point up the service's floors:\n" + "\n".join(wrong)
