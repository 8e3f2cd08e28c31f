"""Per-request guards: a compute deadline, and early refusal of bodies over the size limit.

**Compute deadline.** Under gunicorn's sync workers each request runs in the worker's main
thread. Two mechanisms stop a request at ``Settings.request_timeout`` seconds, both raising
:class:`ComputeTimeout`, which the one error path turns into a 503 problem+json:

- *Checkpoints.* The request's :class:`Deadline` is installed as the core's checkpoint
  (:mod:`service.core.interrupt`): the batch driver checks it between chunks and between
  series, a fit between its phases, the NDJSON stream between lines. This is where long
  compiled work stops, at a clean point.
- *The timer.* A POSIX interval timer (``signal.setitimer(ITIMER_REAL)``) is armed when the
  request starts and disarmed when its response has been produced (streamed bodies
  included), for code with no checkpoint (parsing, plotting, a slow body upload). When it
  fires inside numba's or llvmlite's own Python code (compiled code loading or calling
  back), an exception could not cross the compiled frames and would surface as a
  SystemError: the timer then tries again 10 ms later, once control is back in ordinary
  code. If the first interruption is swallowed by a broad ``except Exception``, the timer
  fires again every :data:`REPEAT_SECONDS` with :class:`DeadlinePassed`, a ``BaseException``
  that such handlers do not catch, and the middleware answers the same 503 itself.

Once the limit has passed, any failure of the request is answered as the 503 (the error path
asks :func:`deadline_of`), so an interruption that surfaces as another exception is never a
500. A single C call that never returns to Python (one huge LAPACK call) cannot be
interrupted; gunicorn's ``timeout`` (set a little above ``request_timeout`` in
``service.runtime.gunicorn_conf``) is the hard backstop that kills and replaces the worker.

An exception raised by the timer can land anywhere in Python code, so a gunicorn worker
whose request was interrupted that way finishes answering and then retires (it sends itself
SIGTERM, gunicorn's graceful stop); the master starts a fresh one. A checkpoint stops at a
clean point and keeps the worker.

A SIGALRM timer that was already running (a test runner's timeout, say) is put back when the
request ends, less the time the request took.

Where the timer cannot be used (a non-main thread, e.g. Flask's threaded development server,
or a platform without ``SIGALRM``) the guard stands aside and only gunicorn's timeout applies.

**Body size.** A declared ``Content-Length`` over ``Settings.max_body_bytes`` is refused with 413
before a byte of the body is read (Werkzeug would do the same when the body is first read; this
makes it independent of whether and when a view reads it). Chunked bodies are counted while
they are read (:mod:`service.api.body`): one byte over the limit is a 413 problem.
"""

from __future__ import annotations

import _signal
import os
import signal
import sys
import threading
import time

from flask import Flask, request
from werkzeug.exceptions import RequestEntityTooLarge

from service.core import interrupt
from service.http.errors import (
    DEADLINE_KEY,
    PROBLEM_MIME,
    ServiceLimitError,
    problem_body,
    timeout_message,
)
from service.http.jsonio import dumps_bytes

REPEAT_SECONDS = 1.0
# signal.signal without its enum conversions (``_signal`` is the C module that ``signal`` wraps;
# the wrapper's two IntEnum look-ups cost a few microseconds per request). It takes and
# returns handlers as ints or callables; signal.getsignal still reads them back as enums.
_set_handler = _signal.signal
RETRY_SECONDS = 0.01  # the timer fired inside compiled machinery: try again this soon
ENVIRON_KEY = DEADLINE_KEY
PRODUCED_KEY = "curvewise.answer_produced"  # a non-streamed answer: nothing left to compute
_COMPILED_PACKAGES = ("numba", "llvmlite")


class ComputeTimeout(ServiceLimitError):
    """The request's compute ran past ``request_timeout``; answered as 503 problem+json."""

    def __init__(self, limit: float) -> None:
        super().__init__(503, "timeout", timeout_message(limit))
        self.limit = limit


class DeadlinePassed(BaseException):  # noqa: N818 - a signal, not an error to handle
    """Raised when the timer fires again after a swallowed :class:`ComputeTimeout`."""


class Deadline:
    """One request's compute deadline, kept in ``environ["curvewise.deadline"]``.

    :meth:`check` is the core's checkpoint (:mod:`service.core.interrupt`): it raises
    :class:`ComputeTimeout` once the limit has passed. ``expired`` says whether the limit has
    passed, however that was noticed; the error path answers any failure after it as the
    503 (an interruption can surface as another exception). A streamed answer that handled
    the timeout itself calls :meth:`stand_down` to finish its last lines undisturbed.
    """

    def __init__(self, limit: float) -> None:
        self.limit = limit
        self.at = time.monotonic() + limit
        self.expired = False
        self.raised = False  # a checkpoint raised the timeout
        self.stood_down = False
        self.cooperative = False  # the answer checks the deadline itself: the timer only marks

    def checked_by_caller(self) -> None:
        """From now on only checkpoints stop the request; the timer just marks the limit.

        For a streamed answer that checks between its lines: an exception from the timer
        could otherwise land in the server's own write of a line and cut the stream.
        """
        self.cooperative = True

    def check(self) -> None:
        """Raise :class:`ComputeTimeout` when the limit has passed (unless stood down)."""
        if not self.stood_down and time.monotonic() >= self.at:
            self.expired = self.raised = True
            if timer_usable() and not self.cooperative:
                # the error path gets REPEAT_SECONDS to answer; then the timer's backstop
                signal.setitimer(signal.ITIMER_REAL, REPEAT_SECONDS, REPEAT_SECONDS)
            raise ComputeTimeout(self.limit)

    def stand_down(self) -> None:
        """Stop the timer and the checks: the timeout has been answered."""
        self.stood_down = True
        if timer_usable():
            signal.setitimer(signal.ITIMER_REAL, 0)


def deadline_of(environ) -> Deadline | None:
    """The deadline guarding this request, if any."""
    return environ.get(ENVIRON_KEY)


def timer_usable() -> bool:
    """Whether a SIGALRM interval timer can guard the current thread."""
    return hasattr(signal, "setitimer") and threading.current_thread() is threading.main_thread()


def _inside_compiled_machinery(frame, depth: int = 4) -> bool:
    """Whether the interrupted Python code runs on behalf of compiled code (numba's loader,
    llvmlite callbacks): an exception raised there cannot cross back through the compiled
    frames (it surfaces as a SystemError), so the timer waits until the code is back."""
    while frame is not None and depth > 0:
        if frame.f_globals.get("__name__", "").startswith(_COMPILED_PACKAGES):
            return True
        frame, depth = frame.f_back, depth - 1
    return False


class DeadlineMiddleware:
    """WSGI middleware arming the compute timer around one request, body iteration included."""

    def __init__(self, wsgi_app, limit: float) -> None:
        self.wsgi_app = wsgi_app
        self.limit = limit

    def __call__(self, environ, start_response):
        if self.limit <= 0 or not timer_usable():
            return self.wsgi_app(environ, start_response)
        deadline = environ[ENVIRON_KEY] = Deadline(self.limit)
        fired = []  # interruptions raised by the timer inside running code

        def on_alarm(signum, frame):
            deadline.expired = True
            if deadline.stood_down or deadline.cooperative:
                return
            if _inside_compiled_machinery(frame):
                signal.setitimer(signal.ITIMER_REAL, RETRY_SECONDS, REPEAT_SECONDS)
                return
            fired.append(True)
            if len(fired) == 1 and not deadline.raised:
                raise ComputeTimeout(self.limit)
            raise DeadlinePassed  # a timeout was raised before and swallowed

        previous = _Previous(_set_handler(signal.SIGALRM, on_alarm),
                             signal.setitimer(signal.ITIMER_REAL, self.limit, REPEAT_SECONDS),
                             interrupt.install(deadline.check))
        retire = environ.get("SERVER_SOFTWARE", "").startswith("gunicorn")
        started = []

        def tracked_start(*args):
            started.append(True)
            return start_response(*args)

        try:
            result = self.wsgi_app(environ, tracked_start)
        except DeadlinePassed:
            _disarm(previous)
            result = self._timeout_response(environ, start_response, bool(started))
            fired.append(True)
        except BaseException:
            _disarm(previous)
            _retire_if(fired and retire)
            raise
        if fired or environ.get(PRODUCED_KEY):
            # the answer is the 503 already, or wholly produced: only the server's writes are
            # left, and an interruption there would cut a finished answer short
            _disarm(previous)
            if not (fired and retire):
                return result  # nothing is left to do after the body: the server closes it
            return _GuardedBody(result, previous, lambda: _retire_if(True), armed=False)
        return _GuardedBody(result, previous, lambda: _retire_if(fired and retire))

    def _timeout_response(self, environ, start_response, restart: bool):
        error = ComputeTimeout(self.limit)
        body = problem_body(503, None, error.message, errors={"_body": [error.message]},
                            code=error.code)
        body["instance"] = environ.get("PATH_INFO")
        payload = dumps_bytes(body)
        start_response("503 SERVICE UNAVAILABLE", [("Content-Type", PROBLEM_MIME),
                                                   ("Content-Length", str(len(payload))),
                                                   ("Cache-Control", "no-store")],
                       *([sys.exc_info()] if restart else []))  # PEP 3333: replace a start
        return [payload]


def _retire_if(needed) -> None:
    """Ask this gunicorn worker to stop after the current request (graceful SIGTERM)."""
    if needed:
        os.kill(os.getpid(), signal.SIGTERM)


class _Previous:
    """The SIGALRM handler and timer that were in place before the request (e.g. a test
    runner's own timeout), restored afterwards with the time that has passed taken off; and
    the core's checkpoint that was installed before."""

    def __init__(self, handler, timer: tuple[float, float], check) -> None:
        self.handler = handler if handler is not None else signal.SIG_DFL
        self.delay, self.interval = timer
        self.armed_at = time.monotonic()
        self.check = check


def _disarm(previous: _Previous) -> None:
    signal.setitimer(signal.ITIMER_REAL, 0)
    _set_handler(signal.SIGALRM, previous.handler)
    interrupt.restore(previous.check)
    if previous.delay > 0:  # an earlier timer keeps running; overdue ones fire at once
        left = previous.delay - (time.monotonic() - previous.armed_at)
        signal.setitimer(signal.ITIMER_REAL, max(left, 0.001), previous.interval)


class _GuardedBody:
    """Response iterable that keeps the timer armed until the server has the whole body."""

    def __init__(self, body, previous, after, armed: bool = True) -> None:
        self._body = body
        self._previous = previous
        self._after = after
        self._armed = armed
        self._closed = False

    def __iter__(self):
        try:
            yield from self._body
        finally:
            self.close()

    def disarm(self) -> None:
        if self._armed:
            self._armed = False
            _disarm(self._previous)

    def close(self) -> None:
        if self._closed:
            return
        self._closed = True
        self.disarm()
        try:
            close = getattr(self._body, "close", None)
            if close is not None:
                close()
        finally:
            self._after()


def install(app: Flask) -> None:
    """Add the compute deadline and the early 413 to ``app`` (from its Settings)."""
    settings = app.config["CURVEWISE"]
    app.wsgi_app = DeadlineMiddleware(app.wsgi_app, float(settings.request_timeout))
    limit = int(settings.max_body_bytes)

    @app.after_request
    def _mark_produced(response):
        if not response.is_streamed:
            request.environ[PRODUCED_KEY] = True
        return response

    @app.before_request
    def _body_size():
        declared = request.content_length
        if declared is not None and declared > limit:
            raise RequestEntityTooLarge(
                f"The body declares {declared} bytes; the limit is {limit}. Fix: split the data "
                "over several requests, or ask the operator to raise CURVEWISE_MAX_BODY_BYTES.")
