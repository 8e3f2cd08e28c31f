"""The client over real loopback HTTP against a scripted stub: errors, retries, timeouts, streaming.

The behaviours checked are those of HTTP/1.1 (RFC 9112: chunked transfer coding),
RFC 9457 problem details and RFC 9110 Retry-After; the policy itself (which calls are
retried) is the one documented in ``curvewise_client.errors``.
"""

from __future__ import annotations

import json
import socket
import threading
import time

import pytest
from curvewise_client import (
    Client,
    ComputeTimeout,
    ConnectError,
    CurvewiseError,
    NotFound,
    ProtocolError,
    RequestTimeout,
    ServerError,
    ServiceUnavailable,
    TransportError,
    UnprocessableInput,
)

from tests.client.stub import PROBLEM_HEADERS, Reply, problem

FIT_OK = json.dumps({"model": {"family": "polynomial", "degree": 1,
                               "terms": ["intercept", "x"]},
                     "n": 3, "selection": {"method": "fixed", "chosen_degree": 1}}).encode()


def _client(url: str, **kw) -> tuple[Client, list[float]]:
    pauses: list[float] = []
    return Client(url, sleep=pauses.append, **kw), pauses


def test_503_is_retried_with_backoff_and_retry_after(stub):
    stub.script(Reply(503, problem(503, "Service Unavailable", "warming up"),
                      {**PROBLEM_HEADERS, "Retry-After": "1"}),
                Reply(503, problem(503, "Service Unavailable", "still warming up"),
                      PROBLEM_HEADERS),
                Reply(200, FIT_OK))
    client, pauses = _client(stub.url, retries=2, backoff=0.25, backoff_cap=4.0)
    fit = client.fit([1, 2, 3], [2, 4, 6.5], degree=1)
    assert fit.chosen_degree == 1
    assert [s.path for s in stub.seen] == ["/v1/fit"] * 3
    # first pause honours Retry-After (1 s > 0.25 s backoff), second doubles the backoff
    assert pauses == [1.0, 0.5]
    assert all(s.body == stub.seen[0].body for s in stub.seen)  # same body every attempt


def test_503_gives_up_after_the_retries_and_says_how_many_attempts(stub):
    stub.script(*[Reply(503, problem(503, "Service Unavailable", "busy"), PROBLEM_HEADERS)] * 3)
    client, pauses = _client(stub.url, retries=2)
    with pytest.raises(ServiceUnavailable) as info:
        client.fit([1, 2, 3], [1, 2, 3], degree=1)
    assert info.value.attempts == 3 and len(stub.seen) == 3 and len(pauses) == 2
    assert isinstance(info.value, ServerError)


@pytest.mark.parametrize("status, cls", [(422, UnprocessableInput), (404, NotFound),
                                         (500, ServerError)])
def test_other_error_statuses_are_not_retried(stub, status, cls):
    stub.script(Reply(status, problem(status, "No", "the degree is over the limit",
                                      {"model.degree": ["must be at most 10"]}),
                      PROBLEM_HEADERS), Reply(200, FIT_OK))
    client, pauses = _client(stub.url, retries=3)
    with pytest.raises(cls) as info:
        client.fit([1, 2, 3], [1, 2, 3], degree=50)
    assert len(stub.seen) == 1 and pauses == []
    assert info.value.status == status
    assert info.value.field_errors == {"model.degree": ("must be at most 10",)}
    assert "model.degree" in str(info.value)


def test_a_post_that_times_out_is_not_retried(stub):
    stub.script(Reply(200, FIT_OK, delay=1.0), Reply(200, FIT_OK))
    client, pauses = _client(stub.url, timeout=0.2, retries=2)
    started = time.monotonic()
    with pytest.raises(RequestTimeout) as info:
        client.fit([1, 2, 3], [1, 2, 3], degree=1)
    assert time.monotonic() - started < 0.9  # gave up at the timeout, did not wait for the reply
    assert isinstance(info.value, TimeoutError) and isinstance(info.value, TransportError)
    assert len(stub.seen) == 1 and pauses == []


def test_a_get_that_times_out_is_retried(stub):
    stub.script(Reply(200, b'{"families": []}', delay=0.6), Reply(200, b'{"families": []}'))
    client, pauses = _client(stub.url, timeout=0.2, retries=1)
    assert client.families().families == ()
    assert len(stub.seen) == 2 and len(pauses) == 1


def test_connection_refused_is_a_connect_error_after_retries():
    with socket.socket() as sock:  # a port that was free a moment ago and has no listener
        sock.bind(("127.0.0.1", 0))
        port = sock.getsockname()[1]
    client, pauses = _client(f"http://127.0.0.1:{port}", retries=2, timeout=1.0)
    with pytest.raises(ConnectError) as info:
        client.fit([1, 2, 3], [1, 2, 3])
    assert info.value.attempts == 3 and len(pauses) == 2
    assert isinstance(info.value, CurvewiseError)


def test_a_non_json_success_body_is_a_protocol_error(stub):
    stub.script(Reply(200, b"<html>proxy page</html>", {"Content-Type": "text/html"}))
    client, _ = _client(stub.url)
    with pytest.raises(ProtocolError, match="text/html"):
        client.fit([1, 2, 3], [1, 2, 3])


def test_an_error_without_problem_details_still_becomes_an_api_error(stub):
    stub.script(Reply(502, b"Bad Gateway from a proxy", {"Content-Type": "text/plain"}))
    client, _ = _client(stub.url, retries=2)
    with pytest.raises(ServerError) as info:
        client.fit([1, 2, 3], [1, 2, 3])
    assert info.value.status == 502 and "Bad Gateway from a proxy" in info.value.problem.detail
    assert len(stub.seen) == 1  # only 503 is retried among statuses


def test_token_and_body_reach_the_server(stub):
    stub.script(Reply(200, FIT_OK))
    client, _ = _client(stub.url, token="s3cret")
    client.fit([0.5, 1.0, 1.5], [0.1 + 0.2, 3.9, 6.2], max_degree=2, level=0.9)
    seen = stub.seen[0]
    assert seen.headers["Authorization"] == "Bearer s3cret"
    assert seen.headers["Content-Type"] == "application/json"
    body = json.loads(seen.body)
    assert body == {"x": [0.5, 1.0, 1.5], "y": [0.1 + 0.2, 3.9, 6.2],
                    "model": {"max_degree": 2}, "level": 0.9}
    assert body["y"][0] == 0.30000000000000004  # every digit of a double survives (repr)


def test_ndjson_streaming_is_full_duplex(stub):
    """Result 1 must arrive while the input generator is still waiting to produce line 3."""
    got_first = threading.Event()
    waited: list[bool] = []

    def series():
        for i in range(5):
            if i == 2:
                waited.append(got_first.wait(timeout=5.0))
            yield {"id": f"s{i}", "x": [1, 2, 3], "y": [1, 2, i]}

    client = Client(stub.url, timeout=10)
    items = []
    for item in _stream(client, series()):
        items.append(item)
        got_first.set()
    assert waited == [True], "the first result did not arrive before the input was finished"
    assert [item.id for item in items] == ["s0", "s1", "s2", "s3", "s4"]
    assert items[4].fit["echo"]["y"] == (1, 2, 4)


def _stream(client: Client, series):
    """``Client.batch_stream`` against the stub's echo route (same transport code path)."""
    from curvewise_client.bodies import encode
    from curvewise_client.client import NDJSON
    from curvewise_client.streaming import BatchStream

    lines = (encode(s) + b"\n" for s in series)
    response = client._request("POST", "/echo-lines", lines, content_type=NDJSON,
                               accept=NDJSON, retry=False)
    return BatchStream(response)


def test_a_compute_timeout_503_is_not_retried(stub):
    body = json.dumps({"type": "/problems/timeout", "code": "timeout", "status": 503,
                       "title": "Computation timed out", "detail": "send less"}).encode()
    stub.script(Reply(503, body, PROBLEM_HEADERS), Reply(200, FIT_OK))
    client, pauses = _client(stub.url, retries=3)
    with pytest.raises(ComputeTimeout) as info:
        client.fit([1, 2, 3], [1, 2, 3])
    assert isinstance(info.value, ServiceUnavailable)
    assert len(stub.seen) == 1 and pauses == [] and info.value.problem.detail == "send less"


class _Boom(Exception):
    pass


def test_an_error_in_the_callers_series_iterator_reaches_the_caller(stub):
    def series():
        yield {"id": "s0", "x": [1, 2, 3], "y": [1, 2, 3]}
        yield {"id": "s1", "x": [1, 2, 3], "y": [1, 2, 4]}
        raise _Boom("bad row 3 in the caller's own file")

    client = Client(stub.url, timeout=5)
    started = time.monotonic()
    got = []
    with pytest.raises(_Boom, match="bad row 3"):
        for item in _stream(client, series()):
            got.append(item.id)
    assert time.monotonic() - started < 4  # raised at once, not after the read timeout
    assert got in ([], ["s0"], ["s0", "s1"])  # never a result past the failure
