"""Every /problems/<code> page shows a failing request and its fix, and both are true.

Each example of service/http/problem_examples.py that the app answers itself is sent
in-process (on an app with the example's settings): the failing request gets exactly its
code, and the fixed request succeeds. The others are the proxy's refusals (shown as raw
HTTP), a bug and a deadline; that list is fixed here so a new code cannot slip past.
"""

from __future__ import annotations

import orjson
import pytest

from service.app import create_app
from service.http.problem_examples import DOCUMENT, EXAMPLES
from service.http.problems import CATALOGUE
from tests.api.helpers import assert_problem

NOT_SENT_IN_PROCESS = {"invalid_body", "malformed_request", "uri_too_long", "headers_too_large",
                       "unsupported_transfer_coding", "internal_error", "timeout",
                       "warming_up"}  # a state of the server, not of a request


@pytest.fixture(scope="module")
def document():
    client = create_app({}).test_client()
    answer = client.post("/v1/fit", json={"x": [0.0, 2.0, 5.0, 10.0, 20.0, 40.0],
                                          "y": [0.004, 0.047, 0.112, 0.213, 0.41, 0.73],
                                          "model": {"degree": 2}})
    return answer.get_json()["fitted_model"]


def _send(client, request, document):
    body = request.body
    if body is not None and not isinstance(body, bytes):
        body = orjson.dumps(body).replace(orjson.dumps(DOCUMENT), orjson.dumps(document))
    return client.open(request.path, method=request.method, data=body,
                       content_type=request.content_type if body is not None else None,
                       headers=request.headers)


def test_every_code_has_an_example():
    assert set(EXAMPLES) == set(CATALOGUE)
    assert {code for code, e in EXAMPLES.items() if e.failing is None} == NOT_SENT_IN_PROCESS


@pytest.mark.parametrize("code", sorted(set(EXAMPLES) - NOT_SENT_IN_PROCESS))
def test_the_failing_request_gets_its_code_and_the_fix_works(code, document):
    example = EXAMPLES[code]
    client = create_app(dict(example.settings)).test_client()
    assert_problem(_send(client, example.failing, document), CATALOGUE[code].status, code)
    fixed = _send(client, example.fixed, document)
    assert fixed.status_code < 300, (code, fixed.data[:400])


def test_each_page_shows_its_example(client):
    for code, example in EXAMPLES.items():
        html = client.get(f"/problems/{code}").get_data(as_text=True)
        assert "<b>Fix:</b>" in html, code
        assert ("class=failing" in html) == bool(example.failing or example.raw), code
        if example.fixed is not None:
            assert "class=fixed" in html, code
