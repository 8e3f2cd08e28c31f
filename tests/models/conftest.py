"""Fixtures of the fitted-model tests: one app per test module, called in-process."""

from __future__ import annotations

import pytest

from service.app import create_app


@pytest.fixture(scope="module")
def api():
    """A test client of an app with built-in defaults, shared by a module's tests."""
    app = create_app({})
    app.config["TESTING"] = True
    return app.test_client()
