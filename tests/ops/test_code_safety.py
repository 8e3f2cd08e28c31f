"""Static guards on the server code: nothing from a request can be evaluated, unpickled,
run as a command or used as a file path.

Common practice for web services (OWASP: injection, insecure deserialization, path
traversal): no eval/exec, no pickle-family deserializers, no shell, and views that never
open files. The scan reads the syntax tree of every module in service/ and schemas/.
"""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[2]
MODULES = sorted([*ROOT.joinpath("service").rglob("*.py"), *ROOT.joinpath("schemas").rglob("*.py")])
BANNED_IMPORTS = {"pickle", "cPickle", "dill", "cloudpickle", "marshal", "shelve", "subprocess",
                  "pty", "telnetlib", "ftplib"}
BANNED_NAMES = {"eval", "exec", "compile", "__import__"}           # called as bare builtins
BANNED_ATTRIBUTES = {("os", "system"), ("os", "popen"), ("os", "execv"), ("os", "execvp"),
                     ("os", "spawnl"), ("pd", "read_pickle"), ("pandas", "read_pickle"),
                     ("np", "load"), ("numpy", "load")}                # np.load can unpickle
BANNED_ANYWHERE = {"send_file", "send_from_directory"}              # files chosen by a request
FILE_CALLS = {"open"}


def _calls(tree):
    """(line, name, owner) for every call; owner is the dotted prefix's first name or None."""
    for node in ast.walk(tree):
        if isinstance(node, ast.Call):
            func = node.func
            if isinstance(func, ast.Name):
                yield node.lineno, func.id, None
            elif isinstance(func, ast.Attribute):
                owner = func.value.id if isinstance(func.value, ast.Name) else None
                yield node.lineno, func.attr, owner


@pytest.mark.parametrize("path", MODULES, ids=lambda p: str(p.relative_to(ROOT)))
def test_no_dangerous_imports_or_calls(path):
    tree = ast.parse(path.read_text(), filename=str(path))
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            names = {alias.name.split(".")[0] for alias in node.names}
        elif isinstance(node, ast.ImportFrom):
            names = {(node.module or "").split(".")[0]}
        else:
            continue
        assert not names & BANNED_IMPORTS, f"{path}:{node.lineno} imports {names & BANNED_IMPORTS}"
    for line, name, owner in _calls(tree):
        where = f"{path}:{line} calls {owner + '.' if owner else ''}{name}()"
        assert not (owner is None and name in BANNED_NAMES), where
        assert (owner, name) not in BANNED_ATTRIBUTES, where
        assert name not in BANNED_ANYWHERE, where
        if "api" in path.parts or "schemas" in path.parts:
            assert not (owner is None and name in FILE_CALLS), f"{where}: a view opens a file"


def test_the_scan_sees_the_code():
    """The guard above would fail on a planted call (so it cannot pass vacuously)."""
    assert len(MODULES) > 20
    planted = ast.parse("import pickle\nvalue = eval(text)\nos.system(cmd)\nre.compile(p)\n")
    assert set(_calls(planted)) == {(2, "eval", None), (3, "system", "os"), (4, "compile", "re")}
    assert any(isinstance(n, ast.Import) and n.names[0].name == "pickle" for n in ast.walk(planted))
