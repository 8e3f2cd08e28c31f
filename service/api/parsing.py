"""Request bodies: strict JSON with orjson, 415 for other media types, clear 400s.

``create_app`` installs :data:`PARSER` on every blueprint, so every
``@blp.arguments(Schema)`` body is decoded here. orjson accepts only strict
JSON (RFC 8259): the tokens ``NaN``/``Infinity``, trailing commas, comments
and invalid UTF-8 are refused with the position of the problem. A leading UTF-8
byte order mark is skipped (RFC 8259 allows a parser to ignore it). The body
itself is read by :mod:`service.api.body` (limits, framing, Content-Encoding).
"""

from __future__ import annotations

import functools
import inspect

import orjson
from flask import request
from flask_smorest import abort
from webargs import core
from webargs.flaskparser import FlaskParser

from service.api.body import read_body

_NON_JSON_TOKENS = (b"NaN", b"Infinity", b"-Infinity", b"nan", b"inf")
BOM = b"\xef\xbb\xbf"  # a UTF-8 byte order mark: allowed before JSON text (RFC 8259 8.1)


def json_text(req) -> bytes:
    """The body without a leading UTF-8 byte order mark."""
    data = read_body(req)
    return data[len(BOM):] if data.startswith(BOM) else data


def non_json_number_hint(error, data: bytes) -> str:
    """What to send instead, when ``error`` stopped at a NaN or Infinity token, else ""."""
    position = getattr(error, "pos", None)
    near = data[position:position + 9] if isinstance(position, int) else b""
    if near.startswith(_NON_JSON_TOKENS) or near.lstrip(b"-").startswith(_NON_JSON_TOKENS):
        return (" NaN and Infinity are not JSON numbers: send null for a missing value "
                "(with \"missing\": \"drop\"), or remove the point.")
    return ""


class OrjsonParser(FlaskParser):
    """webargs' Flask parser with orjson decoding and media-type checks."""

    def _raw_load_json(self, req):
        if not core.is_json(req.mimetype):
            got = req.mimetype or "no Content-Type"
            abort(415, message=f"The body must be JSON (got {got}). "
                               "Send the header Content-Type: application/json.",
                  errors={"_body": ["Send Content-Type: application/json."]},
                  code="unsupported_media_type")
        data = json_text(req)
        if not data.strip():
            abort(400, message="The body is empty. Send a JSON object.",
                  errors={"_body": ["Send a JSON object."]}, code="invalid_json")
        try:
            return orjson.loads(data)
        except orjson.JSONDecodeError as error:  # handled here: webargs skips errors with doc ""
            self._handle_invalid_json_error(error, req)

    def _handle_invalid_json_error(self, error, req, *args, **kwargs):
        message = f"The body is not valid JSON: {error}."
        hint = non_json_number_hint(error, json_text(req))
        if hint:
            message += hint
        elif isinstance(error, UnicodeDecodeError) or "UTF-8" in str(error):
            message = "The body is not valid UTF-8 text. Encode the JSON as UTF-8."
        abort(400, message=message, errors={"_body": [message]}, code="invalid_json")


PARSER = OrjsonParser()


def fast_body(loader):
    """A view decorator (above ``@blp.arguments``): bodies that ``loader`` takes skip the
    webargs/marshmallow layers and reach the undecorated view directly.

    ``loader(data)`` returns exactly what the view's schema would load from the decoded
    JSON ``data``, or None to decline. A declined body (any unusual or invalid one: the
    loader never answers errors) and every body that is not plain JSON (wrong media type,
    empty, not decodable) take the decorated path unchanged, so every error answer is the
    schema's and the parser's own. The decorated view's OpenAPI documentation is kept.
    """

    def decorator(decorated):
        view = inspect.unwrap(decorated)  # the function under every smorest/webargs wrapper

        @functools.wraps(decorated)
        def fast(*args, **kwargs):
            req = request._get_current_object()
            if core.is_json(req.mimetype):
                try:
                    data = orjson.loads(json_text(req))
                except orjson.JSONDecodeError:
                    data = None
                body = fast.loader(data)
                if body is not None:
                    return view(body, *args, **kwargs)
            return decorated(*args, **kwargs)

        fast.loader = loader  # looked up per request (a test may swap it)
        return fast

    return decorator


def install() -> None:
    """Make :data:`PARSER` the body parser of every flask-smorest Blueprint of this service.

    flask-smorest binds the parser when ``@blp.arguments`` decorates a view, so this
    runs before the view modules are imported (see ``service/api/__init__.py``).
    """
    from flask_smorest import Blueprint

    Blueprint.ARGUMENTS_PARSER = PARSER
