"""Bearer tokens, CORS allow-list and protective headers, through the Flask test client.

Expected behaviour is from the standards: RFC 6750 (Bearer, WWW-Authenticate with
error="invalid_token"), RFC 9457 (problem+json), the Fetch standard's CORS protocol.
"""

from __future__ import annotations

import hmac

import pytest

from service.app import create_app
from service.runtime import security

TOKENS = ("old-token-0123456789abcdef", "new-token-fedcba9876543210")


@pytest.fixture
def secured():
    return create_app({"auth_tokens": TOKENS}).test_client()


def test_auth_off_by_default(client):
    assert client.get("/readyz").status_code == 200
    response = client.post("/v1/no-such-endpoint", json={})
    assert response.status_code == 404  # not 401: no tokens configured, no auth


@pytest.mark.parametrize("header", [None, "", "Bearer", "Basic b2xkOnRva2Vu", "Bearer  "])
def test_missing_token_is_401_problem_with_challenge(secured, header):
    headers = {"Authorization": header} if header is not None else {}
    response = secured.post("/v1/fit", json={"x": [1, 2, 3], "y": [1, 2, 3]}, headers=headers)
    assert response.status_code == 401
    assert response.mimetype == "application/problem+json"
    body = response.get_json()
    assert body["status"] == 401 and "Authorization" in body["detail"]
    assert response.headers["WWW-Authenticate"].startswith("Bearer ")
    assert "invalid_token" not in response.headers["WWW-Authenticate"]
    assert response.headers["Cache-Control"] == "no-store"


def test_wrong_token_is_401_invalid_token(secured):
    wrong = TOKENS[0][:-1] + "X"  # differs only in the last character
    response = secured.post("/v1/fit", json={}, headers={"Authorization": f"Bearer {wrong}"})
    assert response.status_code == 401
    assert 'error="invalid_token"' in response.headers["WWW-Authenticate"]
    assert response.get_json()["type"] == "/problems/unauthorized"


@pytest.mark.parametrize("token", TOKENS)
def test_every_rotated_token_is_accepted(secured, token):
    # a valid token gets past auth: whatever /v1/fit then says, it is not 401
    for scheme in ("Bearer", "bearer"):
        response = secured.post("/v1/fit", json={}, headers={"Authorization": f"{scheme} {token}"})
        assert response.status_code != 401


def test_exempt_paths_need_no_token_and_are_configurable():
    app = create_app({"auth_tokens": TOKENS})
    c = app.test_client()
    for path in ("/healthz", "/readyz", "/metrics", "/openapi.json"):
        assert c.get(path).status_code == 200, path
    strict = create_app({"auth_tokens": TOKENS, "auth_exempt": ("/healthz",)}).test_client()
    assert strict.get("/healthz").status_code == 200
    assert strict.get("/metrics").status_code == 401
    assert strict.get("/metrics", headers={"Authorization": f"Bearer {TOKENS[1]}"}
                      ).status_code == 200


def test_exempt_matching_covers_subpaths_not_prefixes():
    assert security.is_exempt("/docs", ("/docs",))
    assert security.is_exempt("/docs/static/x.js", ("/docs",))
    assert not security.is_exempt("/docsX", ("/docs",))
    assert not security.is_exempt("/v1/fit", ("/healthz", "/docs"))


def test_token_check_compares_against_all_tokens(monkeypatch):
    """Timing safety: every configured token is compared (constant-time) on every check."""
    calls = []
    real = hmac.compare_digest

    def spy(a, b):
        calls.append((len(a), len(b)))
        return real(a, b)

    monkeypatch.setattr(security.hmac, "compare_digest", spy)
    check = security.TokenCheck(("a" * 20, "b" * 40, "c" * 30))
    assert check.accepts("a" * 20)        # match on the first token ...
    assert len(calls) == 3                # ... still compares all three
    calls.clear()
    assert not check.accepts("z")
    assert len(calls) == 3
    assert set(calls) == {(32, 32)}       # fixed-length digests: token lengths do not show


def test_safe_headers_on_every_answer(client):
    for response in (client.get("/healthz"), client.get("/nope"), client.get("/metrics")):
        assert response.headers["X-Content-Type-Options"] == "nosniff"
        assert response.headers["X-Frame-Options"] == "DENY"
        assert response.headers["Referrer-Policy"] == "no-referrer"
    problem = client.get("/nope")
    assert problem.headers["Cache-Control"] == "no-store"
    assert "default-src 'none'" in problem.headers["Content-Security-Policy"]
    api = client.post("/v1/fit", json={})
    assert api.headers["Cache-Control"] == "no-store"


def test_cors_off_by_default(client):
    response = client.get("/healthz", headers={"Origin": "https://dash.example.org"})
    assert "Access-Control-Allow-Origin" not in response.headers


def test_cors_allow_list():
    c = create_app({"cors_origins": ("https://dash.example.org",),
                    "auth_tokens": TOKENS}).test_client()
    allowed = c.get("/healthz", headers={"Origin": "https://dash.example.org"})
    assert allowed.headers["Access-Control-Allow-Origin"] == "https://dash.example.org"
    assert "Origin" in allowed.headers.get_all("Vary")
    other = c.get("/healthz", headers={"Origin": "https://evil.example.com"})
    assert "Access-Control-Allow-Origin" not in other.headers
    preflight_headers = {"Origin": "https://dash.example.org",
                         "Access-Control-Request-Method": "POST",
                         "Access-Control-Request-Headers": "authorization, content-type"}
    preflight = c.options("/v1/fit", headers=preflight_headers)  # no token: preflights carry none
    assert preflight.status_code == 204
    assert "POST" in preflight.headers["Access-Control-Allow-Methods"]
    assert "Authorization" in preflight.headers["Access-Control-Allow-Headers"]
    refused = c.options("/v1/fit", headers={**preflight_headers,
                                            "Origin": "https://evil.example.com"})
    assert refused.status_code == 403 and refused.mimetype == "application/problem+json"
    assert "Access-Control-Allow-Origin" not in refused.headers


def test_openapi_documents_bearer_auth_only_when_on(client):
    assert "securitySchemes" not in client.get("/openapi.json").get_json().get("components", {})
    spec = create_app({"auth_tokens": TOKENS}).test_client().get("/openapi.json").get_json()
    assert spec["components"]["securitySchemes"]["bearerAuth"] == {
        "type": "http", "scheme": "bearer",
        "description": "One of the tokens in CURVEWISE_AUTH_TOKENS."}
    fit = spec["paths"]["/v1/fit"]["post"]
    assert fit["security"] == [{"bearerAuth": []}] and "401" in fit["responses"]
    assert spec["paths"]["/healthz"]["get"]["security"] == []


def test_problem_pages_stay_public(secured):
    response = secured.get("/problems/unauthorized")
    assert response.status_code == 200
