"""Build requirements.lock: the server's runtime dependencies, pinned from the installed .venv.

Run ``.venv/bin/python tests/ops/runtime_lock.py > requirements.lock`` after changing
``[project].dependencies`` in pyproject.toml. Only the closure of the runtime dependencies is
pinned (no test extras, no dask), so the container holds what the server imports and nothing else.
"""

from __future__ import annotations

import re
import sys
import tomllib
from importlib import metadata
from pathlib import Path

from packaging.requirements import Requirement

ROOT = Path(__file__).resolve().parents[2]
HEADER = ("# Runtime dependencies of the curvewise server, pinned from a working .venv.\n"
          "# Regenerate: .venv/bin/python tests/ops/runtime_lock.py > requirements.lock\n")


def canonical(name: str) -> str:
    """PEP 503 normalized project name."""
    return re.sub(r"[-_.]+", "-", name).lower()


def runtime_requirements(pyproject: Path = ROOT / "pyproject.toml") -> list[Requirement]:
    """The ``[project].dependencies`` of pyproject.toml, parsed."""
    data = tomllib.loads(pyproject.read_text())
    return [Requirement(line) for line in data["project"]["dependencies"]]


def closure(roots: list[Requirement]) -> dict[str, str]:
    """Installed name -> version for ``roots`` and everything they need (markers evaluated)."""
    pinned: dict[str, str] = {}
    todo = [(req, frozenset(req.extras)) for req in roots]
    seen: set[tuple[str, frozenset]] = set()
    while todo:
        req, extras = todo.pop()
        key = (canonical(req.name), extras)
        if key in seen:
            continue
        seen.add(key)
        dist = metadata.distribution(req.name)
        pinned[canonical(dist.metadata["Name"])] = dist.version
        for line in dist.requires or ():
            child = Requirement(line)
            env_extras = extras or {""}
            if child.marker and not any(child.marker.evaluate({"extra": e}) for e in env_extras):
                continue
            todo.append((child, frozenset(child.extras)))
    return pinned


def render() -> str:
    """The lock file's text."""
    pins = closure(runtime_requirements())
    return HEADER + "".join(f"{name}=={pins[name]}\n" for name in sorted(pins))


if __name__ == "__main__":
    sys.stdout.write(render())
