"""Client test fixtures: a scripted loopback HTTP server."""

from __future__ import annotations

import pytest

from tests.client.stub import StubServer


@pytest.fixture
def stub():
    server = StubServer()
    server.thread.start()
    try:
        yield server
    finally:
        server.server.shutdown()
        server.server.server_close()
        server.thread.join(timeout=5)
