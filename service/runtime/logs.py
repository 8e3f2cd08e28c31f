"""Structured logs: one JSON object per line, stamped with the id of the request being served.

A well-formed incoming ``X-Request-ID`` (1-128 characters from ``A-Z a-z 0-9 . _ : @ / + = -``)
is kept, anything else is replaced by a fresh random id, so an id can never inject into a log
line. Bodies are never logged. gunicorn's own messages use the same formatter
(``service.runtime.gunicorn_conf.logconfig_dict``).
"""

from __future__ import annotations

import logging
import re
import sys
import time
import uuid

import orjson
from flask import g, has_request_context, request

REQUEST_ID_HEADER = "X-Request-ID"
_REQUEST_ID_OK = re.compile(r"[A-Za-z0-9._:@/+=-]{1,128}")


class JsonFormatter(logging.Formatter):
    """One JSON object per record: time, level, logger, message, request id, extra ``fields``."""

    def format(self, record: logging.LogRecord) -> str:
        entry = {
            "time": time.strftime("%Y-%m-%dT%H:%M:%S", time.gmtime(record.created))
            + f".{int(record.msecs):03d}Z",
            "level": record.levelname,
            "logger": record.name,
            "message": record.getMessage(),
            "pid": record.process,
        }
        request_id = getattr(record, "request_id", None) or current_request_id()
        if request_id:
            entry["request_id"] = request_id
        entry.update(getattr(record, "fields", None) or {})
        if record.exc_info:
            entry["exception"] = self.formatException(record.exc_info)
        return orjson.dumps(entry, default=str).decode()


def current_request_id() -> str | None:
    """The id of the request being handled, if any."""
    if has_request_context():
        return g.get("request_id")
    return None


def configure_logging(level: str) -> None:
    """JSON lines on stderr for the ``curvewise`` loggers (once per process)."""
    logger = logging.getLogger("curvewise")
    logger.setLevel(level.upper())
    if not any(isinstance(h.formatter, JsonFormatter) for h in logger.handlers):
        handler = logging.StreamHandler(sys.stderr)
        handler.setFormatter(JsonFormatter())
        logger.addHandler(handler)
        logger.propagate = False


def incoming_request_id() -> str:
    """The request's own well-formed X-Request-ID, or a fresh random id."""
    given = request.headers.get(REQUEST_ID_HEADER, "")
    return given if _REQUEST_ID_OK.fullmatch(given) else uuid.uuid4().hex


