"""Request bodies: strict JSON with orjson, 415 for other media types, clear 400s.

``create_app`` installs :data:`PARSER` on every blueprint, so every
``@blp.arguments(Schema)`` body is decoded here. orjson accepts only strict
JSON (RFC 8259): the tokens ``NaN``/``Infinity``, trailing commas, comments
and invalid UTF-8 are refused with the position of the problem.
"""

from __future__ import annotations

import orjson
from flask_smorest import abort
from webargs import core
from webargs.flaskparser import FlaskParser

_NON_JSON_TOKENS = (b"NaN", b"Infinity", b"-Infinity", b"nan", b"inf")


class OrjsonParser(FlaskParser):
    """webargs' Flask parser with orjson decoding and media-type checks."""

    def _raw_load_json(self, req):
        if not core.is_json(req.mimetype):
            got = req.mimetype or "no Content-Type"
            abort(415, message=f"The body must be JSON (got {got}). "
                               "Send the header Content-Type: application/json.",
                  errors={"_body": ["Send Content-Type: application/json."]},
                  code="unsupported_media_type")
        data = read_body(req)
        if not data.strip():
            abort(400, message="The body is empty. Send a JSON object.",
                  errors={"_body": ["Send a JSON object."]}, code="invalid_json")
        try:
            return orjson.loads(data)
        except orjson.JSONDecodeError as error:  # handled here: webargs skips errors with doc ""
            self._handle_invalid_json_error(error, req)

    def _handle_invalid_json_error(self, error, req, *args, **kwargs):
        message = f"The body is not valid JSON: {error}."
        data = read_body(req)
        position = getattr(error, "pos", None)
        near = data[position:position + 9] if isinstance(position, int) else b""
        if near.startswith(_NON_JSON_TOKENS) or near.lstrip(b"-").startswith(_NON_JSON_TOKENS):
            message += (" NaN and Infinity are not JSON numbers: send null for a missing value "
                        "(with \"missing\": \"drop\"), or remove the point.")
        elif isinstance(error, UnicodeDecodeError) or "UTF-8" in str(error):
            message = "The body is not valid UTF-8 text. Encode the JSON as UTF-8."
        abort(400, message=message, errors={"_body": [message]}, code="invalid_json")


def read_body(req) -> bytes:
    """The request body, read once and cached on the request.

    With a declared Content-Length (already checked against the limit before the view
    ran) the body is read from the WSGI input in one call: werkzeug's generic reader
    copies it in 64 KiB pieces, which costs ~3x more on multi-megabyte bodies. Chunked
    bodies go through werkzeug, which enforces MAX_CONTENT_LENGTH while reading.
    """
    cached = req.environ.get("curvewise.body")
    if cached is not None:
        return cached
    length = req.content_length
    limit = req.max_content_length
    already_read = "_cached_data" in vars(req)  # someone called get_data() before us
    if length is None or already_read or (limit is not None and length > limit):
        data = req.get_data(cache=True)  # werkzeug: chunked bodies and the 413 path
    else:
        data = req.environ["wsgi.input"].read(length)
        if len(data) != length:
            abort(400, message=f"The body ended after {len(data)} of the {length} declared "
                               "bytes. Send the whole body.",
                  errors={"_body": ["Incomplete body."]}, code="invalid_json")
    req.environ["curvewise.body"] = data
    return data


PARSER = OrjsonParser()


def install() -> None:
    """Make :data:`PARSER` the body parser of every flask-smorest Blueprint of this service.

    flask-smorest binds the parser when ``@blp.arguments`` decorates a view, so this
    runs before the view modules are imported (see ``service/api/__init__.py``).
    """
    from flask_smorest import Blueprint

    Blueprint.ARGUMENTS_PARSER = PARSER
