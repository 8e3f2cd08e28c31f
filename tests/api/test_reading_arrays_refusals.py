"""/v1/predict x and /v1/invert y refuse a null or an empty list with a fix that the endpoint
accepts: these endpoints have no "missing" option, so the advice must not send callers there
(it would only add an "Unknown field" error). Oracle: the request schemas these endpoints
publish (no missing member)."""

from __future__ import annotations

import pytest

from tests.api.helpers import assert_problem, post_json


@pytest.fixture
def document(client):
    body = {"x": [0.0, 0.5, 1.0, 2.0, 4.0, 8.0], "y": [0.1, 1.1, 1.9, 3.2, 4.1, 5.0],
            "model": {"family": "michaelis_menten"}, "include": ["fitted_model"]}
    res = post_json(client, "/v1/fit", body)
    assert res.status_code == 200
    return res.get_json()["fitted_model"]


@pytest.mark.parametrize(("path", "member"), [("/v1/predict", "x"), ("/v1/invert", "y")])
def test_a_null_reading_is_refused_without_pointing_to_missing(client, document, path,
                                                                member):
    res = post_json(client, path, {"fitted_model": document, member: [1.0, None]})
    body = assert_problem(res, 422, "validation_error", field=f"{member}[1]")
    message = body["errors"][f"{member}[1]"][0]
    assert '"missing": "drop"' not in message and "Remove" in message


@pytest.mark.parametrize(("path", "member", "what"), [("/v1/predict", "x", "x to predict at"),
                                                       ("/v1/invert", "y", "reading")])
def test_an_empty_list_asks_for_what_the_endpoint_needs(client, document, path, member,
                                                        what):
    res = post_json(client, path, {"fitted_model": document, member: []})
    body = assert_problem(res, 422, "invalid_data", field=member)
    message = body["errors"][member][0]
    assert what in message and "coefficients" not in message
