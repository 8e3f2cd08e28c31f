"""Shared fixtures, chained app -> client (as in Flask's tutorial)."""

from __future__ import annotations

import json
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent
NIST_DIR = ROOT.parent / "shared" / "reference" / "nist-strd"


def load_nist(name: str) -> dict:
    """Load one NIST StRD reference file (../shared/reference/nist-strd/<name>.json)."""
    path = NIST_DIR / f"{name}.json"
    if not path.exists():
        pytest.fail(f"NIST reference file missing: {path} (shared/ must sit beside the repo)")
    return json.loads(path.read_text())


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
