"""Helpers for the /v1/fit tests (posting JSON or raw bytes, seeded data, checking problems)."""

from __future__ import annotations

import numpy as np
import orjson

PROBLEM_KEYS = {"type", "code", "title", "status", "detail", "errors"}


def post_json(client, path: str, body, **kwargs):
    """POST ``body`` as strict JSON bytes (orjson) with the JSON content type."""
    return client.post(path, data=orjson.dumps(body), content_type="application/json", **kwargs)


def post_raw(client, path: str, data: bytes, content_type="application/json", **kwargs):
    """POST raw bytes (for bodies that are not valid JSON)."""
    return client.post(path, data=data, content_type=content_type, **kwargs)


def assert_problem(response, status: int, code: str, field: str | None = None) -> dict:
    """The answer is an RFC 9457 problem with this status and code; ``field`` is in errors."""
    assert response.status_code == status, response.data[:500]
    assert response.mimetype == "application/problem+json"
    body = orjson.loads(response.data)
    assert PROBLEM_KEYS <= set(body), body
    assert body["status"] == status
    assert body["code"] == code, body
    assert body["type"] == f"/problems/{code}"
    if field is not None:
        assert field in body.get("errors", {}), body
        assert all(isinstance(m, str) and m for m in body["errors"][field])
    return body


def seeded_quadratic():
    """Seeded quadratic data with noise and positive weights: (x, y, w), 40 points."""
    rng = np.random.default_rng(20261201)
    x = np.sort(rng.uniform(0.0, 10.0, 40))
    y = 2.0 + 1.5 * x - 0.12 * x**2 + rng.normal(0.0, 0.5, x.size)
    w = rng.uniform(0.5, 2.0, x.size)
    return x, y, w


def fit_ok(client, body) -> dict:
    """POST ``body`` to /v1/fit, check it succeeded with JSON, return the parsed answer."""
    response = post_json(client, "/v1/fit", body)
    assert response.status_code == 200, response.data[:600]
    assert response.mimetype == "application/json"
    return orjson.loads(response.data)
