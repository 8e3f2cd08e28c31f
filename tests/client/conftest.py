"""Client test fixtures: a scripted loopback HTTP server; the client against the service."""

from __future__ import annotations

import pytest
from curvewise_client import Client, WSGITransport

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


@pytest.fixture(scope="module")
def inprocess_client():
    from service.app import create_app

    return Client("http://curvewise.test", transport=WSGITransport(create_app({})))


@pytest.fixture(params=["inprocess", pytest.param("live", marks=pytest.mark.live)])
def api(request):
    """The client in-process (WSGI), or against live gunicorn on loopback (marked live).

    A test module may set ``LIVE_CLIENT_RETRIES`` for the live client (default: the client's 2).
    """
    if request.param == "inprocess":
        return request.getfixturevalue("inprocess_client")
    retries = getattr(request.module, "LIVE_CLIENT_RETRIES", 2)
    return Client(request.getfixturevalue("live_url"), timeout=30, retries=retries)
