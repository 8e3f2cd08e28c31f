"""Structured logs: one JSON object per line, stamped with the id of the request being served.

A well-formed incoming ``X-Request-ID`` (1-128 characters from ``A-Z a-z 0-9 . _ : @ / + = -``)
is kept, anything else is replaced by a fresh random id, so an id can never inject into a log
line. Bodies are never logged. gunicorn's own messages use the same formatter
(``service.runtime.gunicorn_conf.logconfig_dict``).
"""

from __future__ import annotations

import logging
import os
import re
import sys
import threading
import time
from pathlib import Path

import orjson
from flask import g, has_request_context, request

REQUEST_ID_HEADER = "X-Request-ID"
_REQUEST_ID_ENVIRON = "HTTP_X_REQUEST_ID"
_REQUEST_ID_OK = re.compile(r"[A-Za-z0-9._:@/+=-]{1,128}")


_last_second: tuple[int, str] = (-1, "")  # one strftime a second, not one a line


def _utc_second(created: float) -> str:
    """``created`` (seconds since the epoch) as ``YYYY-MM-DDTHH:MM:SS`` in UTC."""
    global _last_second
    second, cached = int(created), _last_second
    if cached[0] != second:
        cached = _last_second = (second, time.strftime("%Y-%m-%dT%H:%M:%S", time.gmtime(second)))
    return cached[1]


class JsonFormatter(logging.Formatter):
    """One JSON object per record: time, level, logger, message, request id, extra ``fields``."""

    def format(self, record: logging.LogRecord) -> str:
        entry = {
            "time": f"{_utc_second(record.created)}.{int(record.msecs):03d}Z",
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


class WorkerSignalFilter(logging.Filter):
    """Reword gunicorn's guess about a worker killed by SIGKILL ("Perhaps out of memory?").

    gunicorn cannot know who sent the signal: an operator's or an orchestrator's ``kill -9``
    is as likely as the kernel's out-of-memory killer. Where the cgroup (v2) counts
    out-of-memory kills, the count tells which; elsewhere the message names both and where
    to look. The record also gets ``fields`` ``event`` and ``signal`` for log queries.
    """

    GUESS = " Perhaps out of memory?"
    EVENTS = Path("/sys/fs/cgroup/memory.events")

    def __init__(self, name: str = "") -> None:
        super().__init__(name)
        self.oom_kills = self._oom_kills()

    def filter(self, record: logging.LogRecord) -> bool:
        if not (isinstance(record.msg, str) and record.msg.endswith(self.GUESS)):
            return True
        count, seen = self._oom_kills(), self.oom_kills
        self.oom_kills = count
        if count is not None and seen is not None and count > seen:
            why = "The kernel's out-of-memory killer stopped it (the cgroup's oom_kill count rose)."
        elif count is not None and seen is not None:
            why = ("Not the out-of-memory killer (the cgroup's oom_kill count did not change): "
                   "an operator, an orchestrator or another process sent the signal.")
        else:
            why = ("The signal came from outside the worker: an operator, an orchestrator, or "
                   "the kernel's out-of-memory killer (the kernel log says which).")
        record.msg = record.msg[:-len(self.GUESS)] + " " + why
        signal_name = record.args[1] if isinstance(record.args, tuple) and len(
            record.args) > 1 else None
        record.fields = {**(getattr(record, "fields", None) or {}), "event": "worker_killed",
                         "signal": signal_name}
        return True

    def _oom_kills(self) -> int | None:
        try:
            for line in self.EVENTS.read_text().splitlines():
                key, _, value = line.partition(" ")
                if key == "oom_kill":
                    return int(value)
        except (OSError, ValueError):
            return None
        return None


# LogRecord's clock fields are set below as Python 3.11's LogRecord.__init__ sets them; later
# versions compute them otherwise (time_ns), so they build every record themselves
_FAST_RECORDS = sys.version_info < (3, 12)
_record_templates: dict[tuple[str, str, str], tuple[int, int, dict]] = {}
_new_object = object.__new__


def info_record(name: str, message: str, pathname: str) -> logging.LogRecord:
    """A new INFO record without arguments: what ``logging.LogRecord(name, logging.INFO,
    pathname, 0, message, None, None)`` builds, for a fraction of its cost (one per request).

    The attributes that do not change within one process and thread (level, file and module
    names, thread and process names...) are copied from a record built that way the first
    time; the clock fields are set from a fresh reading, as LogRecord sets them. (Built
    directly, not by Logger.info, which would also walk the stack for a caller nobody reads.)
    """
    key = (name, message, pathname)
    template = _record_templates.get(key)
    pid, thread = os.getpid(), threading.get_ident()
    if template is None or template[0] != pid or template[1] != thread or not _FAST_RECORDS:
        record = logging.LogRecord(name, logging.INFO, pathname, 0, message, None, None)
        _record_templates[key] = (pid, thread, dict(record.__dict__))
        return record
    record = _new_object(logging.LogRecord)
    record.__dict__.update(template[2])
    now = time.time()
    record.created = now
    record.msecs = int((now - int(now)) * 1000) + 0.0  # see gh-89047
    record.relativeCreated = (now - logging._startTime) * 1000
    return record


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
    # the WSGI variable of the header, read directly (request.headers.get derives the same key)
    given = request.environ.get(_REQUEST_ID_ENVIRON, "")
    return given if given and _REQUEST_ID_OK.fullmatch(given) else random_request_id()


def random_request_id() -> str:
    """A random (version 4) UUID as 32 hex digits, like ``uuid.uuid4().hex`` without building
    the UUID object (a few microseconds of every request that brings no id)."""
    raw = bytearray(os.urandom(16))
    raw[6] = raw[6] & 0x0F | 0x40  # version 4
    raw[8] = raw[8] & 0x3F | 0x80  # RFC 4122 variant
    return raw.hex()


