"""Shared fixtures, chained app -> client (as in Flask's tutorial)."""

from __future__ import annotations

import json
import os
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent
# The NIST reference folder stays outside the repository (never copied in): ../shared/reference
# beside the clone, or wherever CURVEWISE_REFERENCE_DIR points.
REFERENCE_DIR = Path(os.environ.get("CURVEWISE_REFERENCE_DIR")
                     or ROOT.parent / "shared" / "reference")
MISSING_REFERENCE = "NIST reference data not found at "


def reference_file(relative: str) -> Path:
    """Path of one reference file; skips the test when it is absent (fails if required).

    The one place that decides what happens without the reference folder: a
    one-line skip reason naming the folder (all such skips fold into one line of
    the ``-ra`` summary), or a failure with the same text when
    ``CURVEWISE_REQUIRE_REFERENCE=1`` (CI, where the folder must be present).
    """
    path = REFERENCE_DIR / relative
    if not path.is_file():
        missing = REFERENCE_DIR if not REFERENCE_DIR.is_dir() else path
        reason = (f"{MISSING_REFERENCE}{missing}: clone the shared folder beside "
                  "the repository (../shared/reference) to run these checks")
        if os.environ.get("CURVEWISE_REQUIRE_REFERENCE") == "1":
            pytest.fail(reason, pytrace=False)
        pytest.skip(reason)
    return path


def load_nist(name: str) -> dict:
    """Load one NIST StRD reference file (<reference folder>/nist-strd/<name>.json)."""
    return json.loads(reference_file(f"nist-strd/{name}.json").read_text())


def pytest_configure(config):
    """On a cold kernel cache, compile the batch kernels on another core meanwhile
    (tests/kernel_prefill.py); not in a run that only lists the tests."""
    if not (config.option.collectonly or config.option.help or config.option.version):
        from tests import kernel_prefill

        kernel_prefill.start()


def pytest_unconfigure(config):
    from tests import kernel_prefill

    kernel_prefill.stop()


@pytest.hookimpl(wrapper=True)
def pytest_runtest_makereport(item, call):
    """Give every missing-reference skip the helper's location, so ``-ra`` folds them into one line.

    pytest reports a skip raised inside a fixture at the test's own location (one
    summary line per test); this puts those skips at the helper like the others.
    """
    report = yield
    where = report.longrepr
    if report.skipped and isinstance(where, tuple) and MISSING_REFERENCE in where[2]:
        report.longrepr = (__file__, reference_file.__code__.co_firstlineno, where[2])
    return report


@pytest.fixture
def app():
    from service.app import create_app

    app = create_app({})
    app.config["TESTING"] = True
    return app


@pytest.fixture
def client(app):
    return app.test_client()


@pytest.fixture(scope="session")
def live_url():
    """Base URL of a real gunicorn server on a free loopback port (see tests/live_server.py)."""
    from tests.live_server import live_server

    with live_server() as base_url:
        yield base_url
