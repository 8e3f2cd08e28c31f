"""The request body, read within CURVEWISE_MAX_BODY_BYTES whether declared or chunked.

Every view reads its body here (JSON through :func:`read_body`, NDJSON through
:func:`spool_body`), so the limit and the framing errors are answered the same way:

- a declared ``Content-Length`` over the limit never gets here (``service.runtime.guard``
  answers 413 from the headers); a body that ends before its declared length is a 400;
- a chunked body (the server de-chunks it and marks ``wsgi.input_terminated``) is read in
  blocks and counted: exactly the limit is fine, one byte more is a 413 and the rest is not
  read (werkzeug's own limited stream would raise at the limit itself, or silently stop
  there for a plain read, and a JSON prefix cut at the limit may parse);
- a framing error raised by the server's reader (a chunk size that is not hex, a chunk
  without its terminator, the client gone) is a 400 ``invalid_body`` problem, never a 500.

Both refusals happen in the view, before any answer starts.
"""

from __future__ import annotations

import tempfile

from flask_smorest import abort

from service.http.problems import ProblemKind, register_kind

BLOCK = 1 << 16
SPOOL_RAM_BYTES = 8 << 20  # NDJSON bodies beyond this wait on disk, not in memory
register_kind(ProblemKind(
    "invalid_body", 400, "Unreadable body",
    "The body could not be read as sent: a chunked body with a malformed chunk size or a "
    "missing chunk terminator, or a body shorter than its Content-Length.",
    "Send the whole body, framed as HTTP/1.1 requires (or let your HTTP library frame it)."))


def read_body(req) -> bytes:
    """The whole request body, read once and cached on the request (``curvewise.body``)."""
    cached = req.environ.get("curvewise.body")
    if cached is not None:
        return cached
    if "_cached_data" in vars(req):  # someone called get_data() before us: reuse it
        data = req.get_data(cache=True)
    else:
        data = b"".join(blocks(req))
    req.environ["curvewise.body"] = data
    return data


def spool_body(req):
    """The whole request body in a spooled temporary file (RAM up to 8 MiB, then disk),
    rewound. The caller closes it."""
    spool = tempfile.SpooledTemporaryFile(max_size=SPOOL_RAM_BYTES)
    try:
        for block in blocks(req):
            spool.write(block)
    except BaseException:
        spool.close()
        raise
    spool.seek(0)
    return spool


def blocks(req, size: int = BLOCK):
    """The body's bytes in blocks, within the declared length or the configured limit.

    Raises (through ``flask_smorest.abort``) 413 ``body_too_large`` for a chunked body over
    the limit and 400 ``invalid_body`` for a short or malformed body.
    """
    environ = req.environ
    coding = environ.get("HTTP_CONTENT_ENCODING", "").strip().lower()
    if coding not in ("", "identity"):  # RFC 9110 15.5.16 / RFC 7694: 415 for a coding
        abort(415, message=f"The body is sent with Content-Encoding {coding!r}, which this "
                           "server does not decode. Send it uncompressed (no Content-Encoding).",
              errors={"_body": ["Send the body without Content-Encoding."]},
              code="unsupported_media_type")
    stream = environ["wsgi.input"]
    declared = req.content_length
    limit = req.max_content_length
    if declared is None and not environ.get("wsgi.input_terminated"):
        return  # no length and no server-terminated stream: no body (werkzeug's fallback)
    want = declared if declared is not None else (limit + 1 if limit is not None else None)
    total = 0
    while want is None or total < want:
        block = _read(stream, size if want is None else min(size, want - total))
        if not block:
            break
        total += len(block)
        if declared is None and limit is not None and total > limit:
            abort(413, message=f"The chunked body is over this server's limit of {limit} "
                               "bytes. Split the data over several requests, or ask the "
                               "operator to raise CURVEWISE_MAX_BODY_BYTES.",
                  errors={"_body": [f"At most {limit} bytes."]}, code="body_too_large")
        yield block
    if declared is not None and total < declared:
        abort(400, message=f"The body ended after {total} of the {declared} declared bytes. "
                           "Send the whole body.",
              errors={"_body": ["Incomplete body."]}, code="invalid_body")


def _framing_errors() -> tuple[type[BaseException], ...]:
    """Exceptions a WSGI server's input stream raises for a badly framed body: OSError (the
    client gone; werkzeug's de-chunker), and gunicorn's parse errors when it serves."""
    try:
        from gunicorn.http.errors import ParseException
    except ImportError:  # pragma: no cover - gunicorn is a runtime dependency
        return (OSError,)
    return (OSError, ParseException)


FRAMING_ERRORS = _framing_errors()


def _read(stream, size: int) -> bytes:
    try:
        return stream.read(size)
    except FRAMING_ERRORS as exc:  # never others: an in-process caller's own error is its own
        said = str(exc)[:120]
        message = (f"The body could not be read: {type(exc).__name__}"
                   + (f" ({said})" if said else "") + ". Frame it as HTTP/1.1 requires.")
        abort(400, message=message, errors={"_body": ["Malformed body framing."]},
              code="invalid_body")
