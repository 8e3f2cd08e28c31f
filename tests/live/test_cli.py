"""``curvewise serve``: flags and settings, production defaults, BLAS pinning."""

from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

import httpx
import pytest

from tests.live_server import live_server

ROOT = Path(__file__).resolve().parents[2]
BLAS = ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS")


def test_importing_the_cli_pins_blas_threads_before_numpy():
    env = {k: v for k, v in os.environ.items() if k not in BLAS}
    code = ("import sys, os, service.cli; assert 'numpy' not in sys.modules; "
            f"print([os.environ[k] for k in {BLAS!r}])")
    out = subprocess.run([sys.executable, "-c", code], cwd=ROOT, env=env, capture_output=True,
                         text=True, timeout=60)
    assert out.returncode == 0, out.stderr
    assert out.stdout.strip() == "['1', '1', '1']"


def test_production_defaults():
    from service.runtime import gunicorn_conf

    assert gunicorn_conf.worker_class == "sync"
    assert gunicorn_conf.default_workers() == max(2, gunicorn_conf.usable_cores())
    assert gunicorn_conf.graceful_timeout > 0
    assert gunicorn_conf.max_requests > 0 and 0 < gunicorn_conf.max_requests_jitter
    assert gunicorn_conf.timeout > 60  # above the app's own 60 s request deadline


def test_worker_start_hook_loads_the_kernels_and_freezes_start_up_objects():
    # In a fresh interpreter, as in a new gunicorn worker: once the hook's warm-up has
    # finished (in the background) the compiled kernels are loaded (a batch and a single
    # fit ran) and the start-up objects are frozen (gc.freeze).
    code = ("import gc; from service.runtime import gunicorn_conf, warming; "
            "gunicorn_conf.post_worker_init(None); assert warming.wait(240); "
            "from service.core.batch import kernel as k; "
            "print(gc.get_freeze_count() > 10000, len(k.fit_rows.signatures) > 0)")
    out = subprocess.run([sys.executable, "-c", code], cwd=ROOT, capture_output=True, text=True,
                         timeout=300)
    assert out.returncode == 0, out.stderr
    assert out.stdout.split() == ["True", "True"]


def test_help_lists_the_flags():
    out = subprocess.run([sys.executable, "-m", "service.cli", "serve", "--help"], cwd=ROOT,
                         capture_output=True, text=True, timeout=60)
    assert out.returncode == 0
    for flag in ("--host", "--port", "--workers", "--dev"):
        assert flag in out.stdout


def test_flags_win_over_environment_over_defaults():
    from service.cli import build_parser, resolve
    from service.runtime.gunicorn_conf import default_workers

    env = {"CURVEWISE_HOST": "127.0.0.2", "CURVEWISE_PORT": "9001", "CURVEWISE_WORKERS": "5"}
    assert resolve(build_parser().parse_args(["serve"]), env) == ("127.0.0.2", 9001, 5)
    flags = build_parser().parse_args(["serve", "--host", "127.0.0.3", "--port", "9002",
                                       "--workers", "3"])
    assert resolve(flags, env) == ("127.0.0.3", 9002, 3)
    assert resolve(build_parser().parse_args(["serve"]), {}) == ("127.0.0.1", 8000,
                                                                  default_workers())


@pytest.mark.live
def test_env_settings_reach_the_workers():
    # CURVEWISE_MAX_DEGREE comes from the environment of `curvewise serve`.
    with live_server(workers=1, env={"CURVEWISE_MAX_DEGREE": "3"}) as url:
        limits = httpx.get(url + "/v1/families", timeout=10.0).json()["limits"]
        over = httpx.post(url + "/v1/fit", json={"x": [1, 2, 3, 4, 5, 6], "y": [1, 2, 3, 4, 5, 7],
                                                 "model": {"degree": 4}}, timeout=10.0)
    assert limits["max_degree"] == 3
    assert over.status_code == 422 and over.json()["code"] == "limit_exceeded"
