"""The client against live gunicorn with auth on and a short compute limit.

RFC 6750: a missing bearer token is a 401 with ``WWW-Authenticate: Bearer``. A request
over the compute limit is a 503 problem (code ``timeout``) that the client must not retry.
"""

from __future__ import annotations

import time

import numpy as np
import pytest
from curvewise_client import Client, ComputeTimeout, Unauthorized

from tests.live_server import live_server

TOKEN = "client-test-token-0123456789abcdef"


@pytest.fixture(scope="module")
def guarded_url():
    env = {"CURVEWISE_AUTH_TOKENS": TOKEN, "CURVEWISE_REQUEST_TIMEOUT": "1.0"}
    with live_server(workers=1, env=env) as base_url:
        yield base_url


@pytest.mark.live
def test_token_required_and_accepted(guarded_url):
    x = np.linspace(0, 1, 10)
    with pytest.raises(Unauthorized) as info:
        Client(guarded_url).fit(x, 2 * x + 1, degree=1)
    assert info.value.status == 401 and "bearer" in info.value.headers.get(
        "www-authenticate", "").lower()
    with pytest.raises(Unauthorized):
        Client(guarded_url, token="wrong-" + TOKEN).fit(x, 2 * x + 1, degree=1)
    fit = Client(guarded_url, token=TOKEN).fit(x, 2 * x + 1, degree=1)
    assert fit.coefficients[1].estimate == pytest.approx(2.0, rel=1e-12)  # y = 2x + 1 exactly


@pytest.mark.live
def test_a_request_over_the_compute_limit_is_not_retried(guarded_url):
    client = Client(guarded_url, token=TOKEN, retries=3, timeout=60, sleep=lambda s: None)
    rng = np.random.default_rng(0)
    x = np.sort(rng.uniform(0, 10, 150_000))
    y = np.sin(x) + rng.normal(0, 0.1, x.size)
    started = time.monotonic()
    with pytest.raises(ComputeTimeout) as info:  # six panels of 150k points take seconds
        client.plot(x, y, max_degree=8, panels=["fit", "studentized_residuals", "influence",
                                                "spread", "half_normal", "selection"],
                    width=2800, height=1800)
    assert info.value.attempts == 1 and info.value.status == 503
    assert time.monotonic() - started < 30
    assert client.fit(x[:50], y[:50], degree=1).n == 50  # the service is still there
