"""The body reader: one read of a declared-length body, reused by later readers."""

from __future__ import annotations

from flask import request

from service.app import create_app

BODY = {"x": [1.0, 2.0, 3.0, 4.0], "y": [1.5, 2.1, 3.2, 3.9], "model": {"degree": 1},
        "include": ["coefficients"]}


def test_a_body_read_earlier_by_another_hook_is_reused():
    app = create_app({})

    @app.before_request
    def peek():
        request.get_data(cache=True)  # e.g. an audit hook

    response = app.test_client().post("/v1/fit", json=BODY)
    assert response.status_code == 200, response.data[:300]


def test_the_body_stays_available_after_the_view_read_it():
    app = create_app({})
    seen = {}

    @app.after_request
    def after(response):
        seen["body"] = request.environ.get("curvewise.body")
        return response

    response = app.test_client().post("/v1/fit", json=BODY)
    assert response.status_code == 200
    assert seen["body"] is not None and b'"degree"' in seen["body"]
