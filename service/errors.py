"""The one error path: every 4xx/5xx leaves as RFC 9457 application/problem+json.

Core errors (:class:`service.core.errors.FitError`) become 422 naming the field
and the fix; HTTP errors (404, 405 with Allow, 413, 415, 400 ...) and
validation errors from the schemas keep their status; anything else is a 500
and a bug.
"""

from __future__ import annotations

import logging

from flask import Flask, Response, request
from flask_smorest import Api
from werkzeug.exceptions import HTTPException, InternalServerError

from service.core.errors import FitError
from service.jsonio import dumps_bytes

PROBLEM_MIME = "application/problem+json"
TYPE_BASE = "https://curvewise.dev/problems/"
log = logging.getLogger("curvewise.errors")


def problem(status: int, title: str, detail: str, *, errors: dict | None = None,
            type_: str | None = None, headers: dict | None = None, **extra) -> Response:
    """Build a problem-details response. ``errors`` maps field paths to lists of messages."""
    body = {
        "type": TYPE_BASE + (type_ or _slug(title)),
        "title": title,
        "status": status,
        "detail": detail,
        "instance": request.path if request else None,
    }
    if errors:
        body["errors"] = errors
    body.update(extra)
    response = Response(dumps_bytes(body), status=status, mimetype=PROBLEM_MIME)
    for key, value in (headers or {}).items():
        response.headers[key] = value
    return response


def problem_body(status: int, title: str, detail: str, *, errors: dict | None = None,
                 type_: str | None = None) -> dict:
    """The same body as :func:`problem`, as a dict (for batch per-series errors)."""
    body = {"type": TYPE_BASE + (type_ or _slug(title)), "title": title, "status": status,
            "detail": detail}
    if errors:
        body["errors"] = errors
    return body


def fit_error_body(error: FitError) -> dict:
    """Problem body (422) for a typed core error, naming the field and the fix."""
    message = error.message + (f" Fix: {error.fix}" if error.fix else "")
    return problem_body(422, "Unprocessable input", message,
                        errors={error.field or "_body": [message]}, type_=error.code)


def _slug(title: str) -> str:
    return "-".join(title.lower().split())


class CurvewiseApi(Api):
    """flask-smorest Api whose HTTP errors are problem+json."""

    def handle_http_exception(self, error: HTTPException):
        data = getattr(error, "data", None) or {}
        errors = data.get("errors") or data.get("messages")
        if isinstance(errors, dict) and set(errors) <= {"json", "query", "headers", "files",
                                                        "form"}:
            errors = _flatten(errors)  # webargs nests by location; we report field paths
        headers = dict(data.get("headers") or {})
        if error.code == 405 and hasattr(error, "valid_methods") and error.valid_methods:
            headers["Allow"] = ", ".join(sorted(error.valid_methods))
        if isinstance(error, InternalServerError):
            original = getattr(error, "original_exception", None)
            if original is not None:
                log.exception("unhandled error", exc_info=original)
        detail = data.get("message") or error.description or error.name
        status = error.code or 500
        if status == 422 and errors:
            detail = "The request body is not valid; see errors for each field and its fix."
        return problem(status, error.name, detail, errors=errors, headers=headers)


def _flatten(nested: dict, prefix: str = "") -> dict:
    out: dict[str, list[str]] = {}
    for key, value in nested.items():
        path = f"{prefix}.{key}" if prefix and not isinstance(key, int) else (
            f"{prefix}[{key}]" if isinstance(key, int) else str(key))
        if key in ("json", "query", "headers", "files", "form") and not prefix:
            path = ""
        if isinstance(value, dict):
            out.update(_flatten(value, path))
        else:
            out[path or "_body"] = list(value) if isinstance(value, (list, tuple)) else [str(value)]
    return out


def register(app: Flask) -> None:
    """Map core errors to 422 problem+json."""

    @app.errorhandler(FitError)
    def _fit_error(error: FitError):
        body = fit_error_body(error)
        return problem(422, body["title"], body["detail"], errors=body["errors"],
                       type_=error.code)
