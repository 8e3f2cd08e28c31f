"""The one error path: every 4xx/5xx leaves as RFC 9457 application/problem+json.

Core errors (:class:`service.core.errors.FitError`) become 422 naming the field
and the fix; HTTP errors (404, 405 with Allow, 413, 415, 400 ...) and
validation errors from the schemas keep their status; limits and timeouts
(:class:`ServiceLimitError`) carry their own; anything else is a 500 and a bug.
``type`` is ``/problems/<code>`` (see :mod:`service.http.problems`).
"""

from __future__ import annotations

import logging
from types import FunctionType

from flask import Flask, Response, request
from flask.sessions import NullSession, SecureCookieSessionInterface
from flask_smorest import Api
from werkzeug.exceptions import HTTPException, InternalServerError

from schemas.common import ProblemSchema
from service.core.errors import FitError
from service.http.jsonio import dumps_bytes
from service.http.problems import kind_for, type_uri

PROBLEM_MIME = "application/problem+json"
VALIDATION_DETAIL = "The request body is not valid; see errors for each field and its fix."
log = logging.getLogger("curvewise.errors")


DEADLINE_KEY = "curvewise.deadline"  # where service.runtime.guard keeps the request's deadline


def timeout_message(limit: float) -> str:
    """What a request stopped at the compute deadline is told."""
    return (f"The request needed more than the {limit:g} s compute limit and was stopped. "
            "Fix: send fewer series or points per request, a lower max_degree or a smaller "
            "grid, or ask the operator to raise CURVEWISE_REQUEST_TIMEOUT.")


class ServiceLimitError(Exception):
    """A request over one of the service's limits, or over its time budget."""

    def __init__(self, status: int, code: str, message: str, *, field: str | None = None):
        super().__init__(message)
        self.status, self.code, self.message, self.field = status, code, message, field


def problem_body(status: int, title: str | None, detail: str, *, errors: dict | None = None,
                 type_: str | None = None, code: str | None = None) -> dict:
    """A problem-details dict. ``code`` (or ``type_``) names a catalogue entry.

    ``errors`` is always present (the contract's shape), empty when no field is at fault.
    """
    kind = kind_for(code or type_, status)
    return {"type": type_uri(kind.code), "code": kind.code, "title": title or kind.title,
            "status": status, "detail": detail, "errors": errors or {}}


def problem(status: int, title: str | None, detail: str, *, errors: dict | None = None,
            type_: str | None = None, headers: dict | None = None, code: str | None = None,
            **extra) -> Response:
    """Build a problem-details response. ``errors`` maps field paths to lists of messages."""
    body = problem_body(status, title, detail, errors=errors, type_=type_, code=code)
    body["instance"] = request.path if request else None
    body.update(extra)
    response = Response(dumps_bytes(body), status=status, mimetype=PROBLEM_MIME)
    for key, value in (headers or {}).items():
        response.headers[key] = value
    return response


def fit_error_body(error: FitError) -> dict:
    """Problem body (422) for a typed core error, naming the field and the fix."""
    message = error.message + (f" Fix: {error.fix}" if error.fix else "")
    errors = {error.field or "_body": [message]}
    for field, detail in getattr(error, "details", ()):  # one entry per further cause
        errors.setdefault(field, []).append(detail)
    return problem_body(422, None, message, errors=errors, code=error.code)


MAX_REMEMBERED_FUNCTIONS = 1000


class _SharedNullSession(SecureCookieSessionInterface):
    """Flask's cookie sessions, with one read-only null session for every request instead of
    a new one each (the API keeps no session: without a secret key Flask opens none; a null
    session refuses every change, so one can serve all requests)."""

    _null = NullSession()

    def make_null_session(self, app: Flask) -> NullSession:
        return self._null


class CurvewiseFlask(Flask):
    """Flask app whose unhandled exceptions are logged once, by the 500 handler below."""

    session_interface = _SharedNullSession()

    def ensure_sync(self, func):
        """Flask's answer per plain function, remembered: Flask asks it for every hook and
        view wrapper of every request (a dozen ``inspect`` calls per request otherwise)."""
        if type(func) is not FunctionType:  # bound methods are new objects on every call
            return super().ensure_sync(func)
        known = self.__dict__.setdefault("_sync_functions", {})
        sync = known.get(func)
        if sync is None:
            sync = super().ensure_sync(func)
            if len(known) < MAX_REMEMBERED_FUNCTIONS:  # hooks and views: a few dozen
                known[func] = sync
        return sync

    def log_exception(self, exc_info) -> None:
        """Skip Flask's own ERROR line: ``CurvewiseApi`` logs the 500 with its traceback."""


class CurvewiseApi(Api):
    """flask-smorest Api whose HTTP errors are problem+json, and documented as such."""

    ERROR_SCHEMA = ProblemSchema
    DEFAULT_ERROR_RESPONSE_NAME = "DEFAULT_ERROR"

    def _register_responses(self):
        """Document every error response as application/problem+json with ProblemSchema."""
        import http

        from flask_smorest.utils import prepare_response

        for status in http.HTTPStatus:
            response = {"description": status.phrase}
            if status >= 400:
                response["schema"] = self.ERROR_SCHEMA
            prepare_response(response, self.spec, PROBLEM_MIME)
            self.spec.components.response(status.name, response, lazy=True)
        response = {"description": "Problem details (RFC 9457)", "schema": self.ERROR_SCHEMA}
        prepare_response(response, self.spec, PROBLEM_MIME)
        self.spec.components.response("DEFAULT_ERROR", response, lazy=True)

    def _register_pagination_header(self):
        """No pagination here: leave flask-smorest's pagination schema out of the document."""

    def handle_http_exception(self, error: HTTPException):
        data = getattr(error, "data", None) or {}
        errors = raw_errors = data.get("errors") or data.get("messages")
        if isinstance(errors, dict):
            errors = flatten_errors(errors)
        headers = dict(data.get("headers") or {})
        if error.code == 405:
            allow = dict(error.get_headers()).get("Allow")
            if allow:
                headers["Allow"] = allow
                errors = errors or {"_method": [f"Use one of: {allow}."]}
        if error.code == 404 and not errors:
            errors = {"_path": [f"No resource at {request.path}. See /openapi.json for the "
                                "paths."]}
        if isinstance(error, InternalServerError):
            original = getattr(error, "original_exception", None)
            deadline = request.environ.get(DEADLINE_KEY)
            if deadline is not None and deadline.expired:  # an interruption in disguise
                log.warning("%s on %s %s after the compute deadline; answered as a timeout",
                            type(original).__name__, request.method, request.path)
                message = timeout_message(deadline.limit)
                return problem(503, None, message, errors={"_body": [message]},
                               code="timeout")
            if original is not None:
                log.error("unhandled error on %s %s", request.method, request.path,
                          exc_info=original)
            return problem(500, None, "An unexpected error occurred; this is a bug.",
                           code="internal_error")
        status = error.code or 500
        agreed = agreed_code(raw_errors) if status == 422 else None
        kind = kind_for(data.get("code") or agreed, status)
        detail = data.get("message") or _detail(status, error)
        if status == 422 and errors and not data.get("message"):
            detail = coded_detail(errors) if agreed else VALIDATION_DETAIL
        if errors is None and status == 413:
            errors = {"_body": [kind.fix]}
        return problem(status, kind.title if kind.when else error.name, detail, errors=errors,
                       headers=headers, code=kind.code)


def _detail(status: int, error: HTTPException) -> str:
    if error.description and error.description != type(error).description:
        return error.description  # a specific message given where the error was raised
    kind = kind_for(None, status)
    if kind.when:
        return f"{kind.when} {kind.fix}"
    return error.description or error.name


def agreed_code(messages) -> str | None:
    """The problem code every message carries (``schemas.fields.CodedMessage``), else None.

    Schema checks of the data (arrays of different lengths, empty arrays) and of a
    fitted-model document name ``invalid_data`` and ``invalid_document`` this way, as the
    core does; a request with other complaints too stays a ``validation_error``.
    """
    codes: set = set()

    def walk(node) -> None:
        if isinstance(node, dict):
            for value in node.values():
                walk(value)
        elif isinstance(node, (list, tuple)):
            for value in node:
                walk(value)
        else:
            codes.add(getattr(node, "code", None))

    walk(messages)
    return next(iter(codes)) if len(codes) == 1 and None not in codes else None


def coded_detail(errors: dict, shown: int = 3) -> str:
    """The ``detail`` of a coded schema problem: the first paths with their messages."""
    parts = [f"{path}: {' '.join(messages)}" for path, messages in list(errors.items())[:shown]]
    if len(errors) > shown:
        parts.append(f"({len(errors) - shown} more fields in errors.)")
    return " ".join(parts)


def flatten_errors(nested: dict, prefix: str = "") -> dict:
    """Turn marshmallow/webargs nested errors into ``{"model.degree": [...], "y[17]": [...]}``."""
    out: dict[str, list[str]] = {}
    for key, value in nested.items():
        if not prefix and key in ("json", "query", "headers", "files", "form", "view_args"):
            path = ""
        elif key == "_schema":
            path = prefix
        elif isinstance(key, int):
            path = f"{prefix}[{key}]"
        else:
            path = f"{prefix}.{key}" if prefix else str(key)
        if isinstance(value, dict) and _dict_entry_errors(value):
            # a mapping field's entry: a bad value is the entry's own path, a bad key
            # (a parameter name) is the mapping's path, never marshmallow's .value/.key
            for part, messages in value.items():
                where = path if part == "value" else prefix
                out.setdefault(where or "_body", []).extend(str(m) for m in messages)
        elif isinstance(value, dict):
            out.update(flatten_errors(value, path))
        else:
            messages = list(value) if isinstance(value, (list, tuple)) else [str(value)]
            out.setdefault(path or "_body", []).extend(str(m) for m in messages)
    return out


def _dict_entry_errors(value: dict) -> bool:
    """True for marshmallow's errors of one entry of a ``fields.Dict``: ``{"key": [...]}``
    and/or ``{"value": [...]}`` (no request schema has fields named key or value)."""
    return bool(value) and set(value) <= {"key", "value"} and all(
        isinstance(v, list) for v in value.values())


def register(app: Flask) -> None:
    """Map core errors and service limits to problem+json (HTTP errors: CurvewiseApi)."""

    @app.errorhandler(FitError)
    def _fit_error(error: FitError):
        body = fit_error_body(error)
        return problem(422, body["title"], body["detail"], errors=body["errors"],
                       code=error.code)

    @app.errorhandler(ServiceLimitError)
    def _limit_error(error: ServiceLimitError):
        return problem(error.status, None, error.message,
                       errors={error.field or "_body": [error.message]}, code=error.code)
