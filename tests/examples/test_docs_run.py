"""Every command in the docs runs as written, from the repository root, against a live server.

The fenced ``sh`` and ``python`` blocks of README.md, client/README.md,
client_examples/README.md and docs/*.md are run in order, file by file, each file in its
own copy of the repository root (a temporary folder of symbolic links to the checkout's
top-level entries, with ``.venv`` linked to the environment running the tests), so the
files the examples write (greenhouse.json, model.json, fit.svg, ...) land there and never
in the checkout. Two things differ from a reader's terminal, both because a test cannot
own port 8000 on a shared machine: the server is the one ``make run`` starts, run by this
test on a free port (its command line taken from ``make -n run``), and the docs' base URL
``http://127.0.0.1:8000`` is replaced by that port's URL (``BASE_URL`` is set for the
examples that read it). A block fails on a non-zero exit status or when it prints a
problem-details answer (curl prints 4xx bodies and exits 0).

Blocks that cannot run in a test are listed in ``NOT_RUN`` with the reason and with where
they are checked instead; nothing else is skipped. The docs' interpreter convention
(``.venv/bin/python``, the environment ``make`` creates; README's Quickstart says so once) is
checked over every code span too.
"""

from __future__ import annotations

import json
import os
import re
import subprocess
import sys
import time
from dataclasses import dataclass
from pathlib import Path

import pytest

from tests.live_server import _ready, _stop, fill_kernel_cache, free_port

ROOT = Path(__file__).resolve().parents[2]
DOCS = ["README.md", "client/README.md", "client_examples/README.md",
        *sorted(str(p.relative_to(ROOT)) for p in (ROOT / "docs").glob("*.md"))]
DOCUMENTED_URL = "http://127.0.0.1:8000"
SHELL = {"sh", "bash", "shell"}
RUN = SHELL | {"python"}
BLOCK_TIMEOUT = 45  # seconds per block; the whole module runs in well under a minute
# Never run by this test, whatever the docs say: they would change the shared environment
# (install, rebuild .venv) or serve forever. A block with one must be listed in NOT_RUN.
UNSAFE = re.compile(r"(^|[\s;&|(=])(make|pip3?|docker)\s|-m pip\b", re.MULTILINE)
COMMAND = re.compile(r"^\s*(\$ )?(make|curl|python3?|\.venv/|pip|docker|jq|node|java|curvewise"
                     r"|client_examples/|scripts/|export|bash|git)\b")

# (doc, first line of the block) -> why it is not run here, and where it is checked instead.
NOT_RUN = {
    ("README.md", "make run"):
        "serves until stopped, on the fixed port 8000: this module starts the very command "
        "`make -n run` prints, on a free port, and runs every other block against it "
        "(test_make_run_serves); `make test` runs the whole suite (about 7 minutes), and "
        "test_make_test_lints_and_runs_the_suite checks what it would run",
    ("client/README.md", "pip install ./client"):
        "installs into the environment running the tests: "
        "tests/client/test_client_installs_alone.py installs ./client into a fresh venv",
    ("docs/operations.md", "docker build -t curvewise ."):
        "needs a container engine and network: tests/ops/test_container.py lints the "
        "Dockerfile and runs its CMD and HEALTHCHECK as written",
}

# Blocks known to fail as written while another branch fixes them, matched by their text
# and not run; an entry whose block runs again goes stale
# (test_every_command_block_is_labelled_and_every_skip_is_used says so). None today.
EXPECTED_TO_FAIL: dict[tuple[str, str], str] = {}


@dataclass(frozen=True)
class Block:
    doc: str
    line: int
    language: str
    text: str

    @property
    def first(self) -> str:
        """The first line without its trailing comment (``make run     # ...`` -> ``make run``)."""
        lines = (re.sub(r"\s+#.*$", "", ln).strip() for ln in self.text.splitlines())
        return next((ln for ln in lines if ln), "")

    def __str__(self) -> str:
        return f"{self.doc}:{self.line} ({self.language or 'no language'}: {self.first!r})"


def fenced_blocks(doc: str) -> list[Block]:
    """The fenced code blocks of one Markdown file, with their language and first line."""
    blocks, current, start, language = [], None, 0, ""
    for number, line in enumerate((ROOT / doc).read_text().splitlines(), start=1):
        fence = re.match(r"^\s*```(\S*)\s*$", line)
        if fence and current is None:
            current, start, language = [], number, fence[1].lower()
        elif fence:
            blocks.append(Block(doc, start, language, "\n".join(current) + "\n"))
            current = None
        elif current is not None:
            current.append(line)
    assert current is None, f"{doc}: the block opened at line {start} is never closed"
    return blocks


def _not_run(block: Block) -> str | None:
    return NOT_RUN.get((block.doc, block.first))


def _expected_failure(block: Block) -> str | None:
    return next((why for (doc, text), why in EXPECTED_TO_FAIL.items()
                 if doc == block.doc and text in block.text), None)


@pytest.fixture(scope="module")
def make_run_command() -> tuple[str, int]:
    """The serve command line ``make run`` runs (from ``make -n``: nothing is executed), moved
    to a free port (``PORT=`` if the Makefile takes it, else its port 8000 replaced)."""
    port = free_port()
    dry = subprocess.run(["make", "-n", "run", f"PORT={port}"], cwd=ROOT, capture_output=True,
                         text=True, timeout=30, check=True).stdout
    serve = [ln for ln in dry.splitlines() if re.search(r"curvewise\b.* serve\b", ln)]
    assert len(serve) == 1, dry
    line = serve[0] if str(port) in serve[0] else serve[0].replace("8000", str(port))
    assert str(port) in line, line
    return line, port


@pytest.fixture(scope="module")
def docs_server(make_run_command, tmp_path_factory):
    """``make run``'s own command on a free port, started and stopped here (bounded)."""
    line, port = make_run_command
    fill_kernel_cache()
    root = _mirror(tmp_path_factory.mktemp("server-root"))
    url = f"http://127.0.0.1:{port}"
    log = open(root / "server.log", "w+b")  # noqa: SIM115 - closed below
    process = subprocess.Popen(["bash", "-c", f"exec {line}"], cwd=root, env=_env(url),
                               stdout=log, stderr=subprocess.STDOUT, stdin=subprocess.DEVNULL,
                               start_new_session=True)  # its own group: _stop ends all of it
    try:
        deadline = time.monotonic() + 60
        while not _ready(url + "/readyz"):
            if process.poll() is not None or time.monotonic() > deadline:
                log.seek(0)
                pytest.fail(f"`make run`'s command did not serve {url}:\n"
                            + log.read().decode(errors="replace")[-3000:])
            time.sleep(0.2)
        yield url
    finally:
        _stop(process)
        log.close()


def _mirror(folder: Path) -> Path:
    """A stand-in repository root: links to the checkout's entries, .venv to this Python's."""
    for entry in ROOT.iterdir():
        if entry.name not in {".venv", ".git"}:
            (folder / entry.name).symlink_to(entry)
    (folder / ".venv").symlink_to(Path(sys.prefix))
    return folder


def _env(url: str) -> dict[str, str]:
    # The checkout's own server and client come first on the path (the shared environment
    # may have another checkout installed in development mode).
    path = os.pathsep.join([str(ROOT), str(ROOT / "client"), os.environ.get("PYTHONPATH", "")])
    env = {**os.environ, "PYTHONPATH": path, "BASE_URL": url, "PYTHONUNBUFFERED": "1"}
    env.pop("API_TOKEN", None)
    return env


def _problems(output: str) -> list[dict]:
    """Problem-details objects among the JSON values a block printed."""
    decoder, found, at = json.JSONDecoder(), [], 0
    while True:
        start = output.find("{", at)
        if start < 0:
            return found
        try:
            value, at = decoder.raw_decode(output, start)
        except ValueError:
            at = start + 1
            continue
        if isinstance(value, dict) and isinstance(value.get("status"), int) \
                and value["status"] >= 400 and "title" in value:
            found.append(value)


def _run(block: Block, root: Path, url: str) -> subprocess.CompletedProcess:
    text = block.text.replace(DOCUMENTED_URL, url)
    if block.language == "python":
        command = [str(root / ".venv" / "bin" / "python"), "-c", text]
    else:
        command = ["bash", "-e", "-o", "pipefail", "-c", text]
    return subprocess.run(command, cwd=root, env=_env(url), capture_output=True, text=True,
                          timeout=BLOCK_TIMEOUT)


def _code(text: str) -> str:
    """The block without its comments (a comment may mention ``pip install``)."""
    return "\n".join(re.sub(r"(^|\s)#.*$", "", line) for line in text.splitlines())


def _runnable(doc: str) -> list[Block]:
    return [b for b in fenced_blocks(doc) if b.language in RUN and not _not_run(b)]


DOCS_WITH_COMMANDS = [doc for doc in DOCS if _runnable(doc)]


def test_only_docs_without_commands_are_left_out():
    assert set(DOCS) - set(DOCS_WITH_COMMANDS) <= {"docs/fitted-model.md", "docs/operations.md"}
    assert "README.md" in DOCS_WITH_COMMANDS and "client/README.md" in DOCS_WITH_COMMANDS


@pytest.mark.live
@pytest.mark.parametrize("doc", DOCS_WITH_COMMANDS)
def test_every_command_of_the_doc_runs_as_written(doc, docs_server, tmp_path):
    root = _mirror(tmp_path)
    ran, known_failing = [], []
    for block in _runnable(doc):
        assert not UNSAFE.search(_code(block.text)), \
            f"{block}: not run (it would change the environment); list it in NOT_RUN"
        if _expected_failure(block):
            known_failing.append(block)  # not run: its text is known to fail (see the list)
            continue
        run = _run(block, root, docs_server)
        problems = _problems(run.stdout)
        assert run.returncode == 0 and not problems, (
            f"{block} failed (exit {run.returncode}):\n{run.stderr[-3000:]}\n"
            f"problems: {problems}\nstdout: {run.stdout[-1500:]}")
        ran.append(block)
    if known_failing:
        pytest.xfail("; ".join(f"{b}: {_expected_failure(b)}" for b in known_failing))
    assert ran


def test_the_files_the_examples_write_are_git_ignored():
    """The files the docs' commands write are git-ignored in a checkout, where readers run them."""
    written = set()
    for doc in DOCS:
        for block in fenced_blocks(doc):
            if block.language in RUN and not _not_run(block):
                written |= set(re.findall(r"(?:>|-o|\.save\()\s*\"?([\w.-]+\.\w+)", block.text))
    written -= {"requirements.lock"}
    assert written, "expected the docs to write example files"
    ignored = subprocess.run(["git", "check-ignore", *sorted(written)], cwd=ROOT,
                             capture_output=True, text=True).stdout.split()
    assert sorted(ignored) == sorted(written), f"not git-ignored: {written - set(ignored)}"


def test_every_command_block_is_labelled_and_every_skip_is_used():
    unlabelled, used, failing = [], set(), set()
    for doc in DOCS:
        for block in fenced_blocks(doc):
            if not block.language and COMMAND.match(block.first):
                unlabelled.append(str(block))  # a command block must say `sh` to be run
            if _not_run(block):
                used.add((block.doc, block.first))
            failing |= {key for key in EXPECTED_TO_FAIL
                        if key[0] == block.doc and key[1] in block.text}
    assert unlabelled == []
    assert used == set(NOT_RUN), f"stale NOT_RUN entries: {set(NOT_RUN) - used}"
    assert failing == set(EXPECTED_TO_FAIL), \
        f"stale EXPECTED_TO_FAIL entries: {set(EXPECTED_TO_FAIL) - failing}"


def test_the_docs_use_one_python_convention():
    """``.venv/bin/python`` (what ``make`` creates) everywhere; never a bare ``python``."""
    bare = []
    for doc in DOCS:
        for number, line in enumerate((ROOT / doc).read_text().splitlines(), start=1):
            if re.search(r"(^|[\s`(|;])python3?\s+(-m\s+\w|[\w./-]+\.py\b)", line):
                bare.append(f"{doc}:{number}: {line.strip()}")
    assert bare == []
    quickstart = (ROOT / "README.md").read_text().split("## A first fit")[0]
    assert ".venv/bin/python" in quickstart  # the convention is stated once, up front


@pytest.mark.live
def test_make_run_serves(make_run_command, docs_server):
    line, port = make_run_command
    assert re.search(r"\.venv/bin/curvewise serve\b", line) and "127.0.0.1" in line
    assert docs_server.endswith(f":{port}") and _ready(docs_server + "/readyz")


def test_make_test_lints_and_runs_the_suite():
    dry = subprocess.run(["make", "-n", "test"], cwd=ROOT, capture_output=True, text=True,
                         timeout=30, check=True).stdout
    assert re.search(r"ruff check service schemas client tests", dry), dry
    assert re.search(r"\.venv/bin/python -m pytest\s*$", dry, re.MULTILINE), dry


def test_problem_answers_in_printed_output_are_found():
    """The check behind "a block fails when it prints a problem": top-level objects only."""
    printed = ('{"n": 3, "results": [{"status": 422, "title": "nested, not an answer"}]}\n'
               'not json {"type": "/problems/x", "title": "Invalid", "status": 422}')
    assert [p["title"] for p in _problems(printed)] == ["Invalid"]
    assert _problems('{"status": 200, "title": "fine"}') == []
