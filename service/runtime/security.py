"""Access control and safe responses: bearer tokens, a CORS allow-list, protective headers.

- **Bearer tokens** (``CURVEWISE_AUTH_TOKENS``, comma-separated; empty = auth off). Several
  tokens may be valid at once so they can be rotated without downtime. Every path needs a token
  except ``CURVEWISE_AUTH_EXEMPT`` (default: health, readiness, metrics, the OpenAPI document and
  /docs; an entry also covers the paths below it), the error-catalogue pages under /problems/
  (a 401's own ``type`` must be readable without a token) and CORS preflights. The presented
  token is compared with *every* configured token by :func:`hmac.compare_digest` over SHA-256
  digests, so neither the position of a match nor the tokens' lengths show in the timing. A
  missing or wrong token is a 401 problem+json with ``WWW-Authenticate: Bearer`` (RFC 6750).
- **CORS** (``CURVEWISE_CORS_ORIGINS``, comma-separated exact origins such as
  ``https://dash.example.org``, or ``*``; empty = off): allowed origins get
  ``Access-Control-Allow-Origin`` and preflights are answered here; other origins get no CORS
  headers (and a 403 on preflight).
- **Headers on every response**: ``X-Content-Type-Options: nosniff``, ``Referrer-Policy:
  no-referrer``, ``X-Frame-Options: DENY``, a restrictive ``Content-Security-Policy`` on
  non-HTML answers, and ``Cache-Control: no-store`` on API answers (``/v1/*``) and errors.
"""

from __future__ import annotations

import hashlib
import hmac
import logging

from flask import Flask, Response, request

from service.http.errors import PROBLEM_MIME, problem
from service.http.problems import ProblemKind, register_kind

log = logging.getLogger("curvewise.security")
MIN_TOKEN_LENGTH = 16
CORS_METHODS = "GET, POST, OPTIONS"
CORS_HEADERS = "Authorization, Content-Type, Accept, X-Request-ID"
CORS_EXPOSE = "X-Request-ID, Retry-After, WWW-Authenticate"
CORS_MAX_AGE = "600"
API_CSP = "default-src 'none'; frame-ancestors 'none'"
ALWAYS_PUBLIC = ("/problems",)  # the error catalogue that problem ``type`` URIs point to
PROTECTIVE_HEADERS = tuple((key, key.lower(), value) for key, value in (  # unless already set
    ("X-Content-Type-Options", "nosniff"), ("Referrer-Policy", "no-referrer"),
    ("X-Frame-Options", "DENY")))

register_kind(ProblemKind(
    "unauthorized", 401, "Unauthorized",
    "Tokens are configured (CURVEWISE_AUTH_TOKENS) and the request has no valid "
    "'Authorization: Bearer <token>' header.",
    "Send a current token; ask the operator for one if yours was rotated out."))
register_kind(ProblemKind(
    "origin_not_allowed", 403, "Origin not allowed",
    "A CORS preflight came from an origin that is not in CURVEWISE_CORS_ORIGINS.",
    "Call from an allowed origin, or ask the operator to add yours."))


def _digest(value: str) -> bytes:
    return hashlib.sha256(value.encode("utf-8", "surrogatepass")).digest()


class TokenCheck:
    """Constant-time membership test of a presented token in the configured set."""

    def __init__(self, tokens: tuple[str, ...]) -> None:
        self._digests = tuple(_digest(t) for t in tokens if t)

    @property
    def enabled(self) -> bool:
        """Whether any token is configured (auth is on)."""
        return bool(self._digests)

    def accepts(self, presented: str) -> bool:
        """True if ``presented`` equals one of the tokens; compares against all of them."""
        given = _digest(presented)
        found = False
        for digest in self._digests:
            found |= hmac.compare_digest(given, digest)
        return found


def is_exempt(path: str, exempt: tuple[str, ...]) -> bool:
    """``path`` equals an exempt entry or lies below it (``/docs`` covers ``/docs/x``)."""
    for entry in exempt:
        base = entry.rstrip("/") or "/"
        if path == base or path.startswith(base.rstrip("/") + "/"):
            return True
    return False


def bearer_token(header: str | None) -> str | None:
    """The token of an ``Authorization: Bearer <token>`` header, or None."""
    if not header:
        return None
    scheme, _, token = header.strip().partition(" ")
    token = token.strip()
    return token if scheme.lower() == "bearer" and token else None


def _unauthorized(reason: str, detail: str) -> Response:
    challenge = 'Bearer realm="curvewise"' + (f', error="{reason}"' if reason else "")
    return problem(401, None, detail, code="unauthorized",
                   errors={"headers.Authorization": [detail]},
                   headers={"WWW-Authenticate": challenge})


def _is_preflight() -> bool:
    return (request.method == "OPTIONS" and "Origin" in request.headers
            and "Access-Control-Request-Method" in request.headers)


def document_auth(spec, exempt: tuple[str, ...]) -> None:
    """Describe bearer auth in the OpenAPI document: scheme, per-operation security, 401s."""
    spec.components.security_scheme("bearerAuth", {
        "type": "http", "scheme": "bearer",
        "description": "One of the tokens in CURVEWISE_AUTH_TOKENS."})
    unauthorized = spec.components.get_ref("response", "UNAUTHORIZED")
    for path, operations in getattr(spec, "_paths", {}).items():
        for method, operation in operations.items():
            if method not in ("get", "post", "put", "patch", "delete") or not isinstance(
                    operation, dict):
                continue
            route = path.split("{", 1)[0].rstrip("/") or "/"
            if is_exempt(route, exempt):
                operation["security"] = []
            else:
                operation["security"] = [{"bearerAuth": []}]
                operation.setdefault("responses", {}).setdefault("401", unauthorized)


def install(app: Flask) -> None:
    """Add token checks, CORS and protective headers to ``app`` (from its Settings)."""
    settings = app.config["CURVEWISE"]
    tokens = TokenCheck(settings.auth_tokens)
    exempt = tuple(settings.auth_exempt) + ALWAYS_PUBLIC
    api = app.extensions.get("curvewise-api")
    if tokens.enabled and api is not None:
        document_auth(api.spec, exempt)
    origins = frozenset(o.rstrip("/") for o in settings.cors_origins if o)
    any_origin = "*" in origins
    short = [t for t in settings.auth_tokens if t and len(t) < MIN_TOKEN_LENGTH]
    if short:
        log.warning("auth token shorter than %d characters configured; use long random tokens",
                    MIN_TOKEN_LENGTH)

    def origin_allowed(origin: str | None) -> bool:
        return bool(origin) and (any_origin or origin.rstrip("/") in origins)

    @app.before_request
    def _access():
        if origins and _is_preflight():
            origin = request.headers["Origin"]
            if not origin_allowed(origin):
                return problem(403, None, f"Origin {origin!r} is not in the CORS allow-list "
                               "(CURVEWISE_CORS_ORIGINS).", code="origin_not_allowed")
            return Response(status=204)
        if not tokens.enabled or is_exempt(request.path, exempt):
            return None
        presented = bearer_token(request.headers.get("Authorization"))
        if presented is None:
            return _unauthorized("", "This endpoint needs a bearer token. Fix: send the header "
                                 "'Authorization: Bearer <token>'.")
        if not tokens.accepts(presented):
            return _unauthorized("invalid_token", "The bearer token is not valid. Fix: send a "
                                 "current token; ask the operator if yours was rotated out.")
        return None

    @app.after_request
    def _headers(response: Response) -> Response:
        headers = response.headers
        # one pass over the few headers instead of a setdefault (three scans) per header
        present = {key.lower() for key, _ in headers}
        for key, lower, value in PROTECTIVE_HEADERS:
            if lower not in present:
                headers.add(key, value)
        mimetype = response.mimetype
        if mimetype != "text/html" and "content-security-policy" not in present:
            headers.add("Content-Security-Policy", API_CSP)
        if request.path.startswith("/v1/") or mimetype == PROBLEM_MIME:
            headers["Cache-Control"] = "no-store"
        if origins and origin_allowed(origin := request.headers.get("Origin")):
            headers["Access-Control-Allow-Origin"] = "*" if any_origin else origin
            headers["Access-Control-Expose-Headers"] = CORS_EXPOSE
            if _is_preflight():
                headers["Access-Control-Allow-Methods"] = CORS_METHODS
                headers["Access-Control-Allow-Headers"] = CORS_HEADERS
                headers["Access-Control-Max-Age"] = CORS_MAX_AGE
        if origins and not any_origin:
            headers.add("Vary", "Origin")
        return response
