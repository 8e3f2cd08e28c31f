"""Everything the client raises, in one tree.

Catch :class:`CurvewiseError` to handle every failure of a call. Below it
there are three kinds, and the difference matters for what you do next:

* an :class:`InputError` means *the client refused an argument before sending
  anything* (infinity in ``y``, a string where an array belongs, a fit result
  without a ``fitted_model``). It is also a builtin :class:`ValueError`, so code
  written for ``except ValueError`` keeps working. A misspelt keyword argument
  is Python's own :class:`TypeError`, raised before any request (every method
  lists the wire members it accepts).
* a :class:`TransportError` means *no usable answer came back* — the server
  could not be reached, the call timed out, or the reply was not what HTTP and
  the contract promise. The input may be perfectly fine; trying again later
  may help.
* an :class:`ApiError` means *the service answered and said no*. It carries
  the RFC 9457 problem details the service sent (``error.problem``), including
  the per-field messages (``error.field_errors``: field path -> messages, e.g.
  ``{"model.degree": ["..."]}``). Sending the same input again will not help,
  except for :class:`ServiceUnavailable`.

Hierarchy::

    CurvewiseError(Exception)
    ├── InputError                    refused before sending (also a builtin ValueError)
    ├── TransportError                no usable HTTP answer
    │   ├── ConnectError              could not connect (refused, unreachable, DNS)
    │   ├── RequestTimeout            no answer within the client's timeout
    │   │                             (also a builtin TimeoutError)
    │   └── ProtocolError             an answer that breaks HTTP or the contract
    │                                 (body not JSON, wrong content type, bad NDJSON line)
    └── ApiError                      a 4xx/5xx answer; .status, .problem, .field_errors
        ├── BadRequest                400  the body is not parsable JSON (or not NDJSON)
        ├── Unauthorized              401  missing or wrong token
        ├── Forbidden                 403
        ├── NotFound                  404
        ├── PayloadTooLarge           413  body or point count over a limit
        ├── UnsupportedMediaType      415  wrong Content-Type
        ├── UnprocessableInput        422  invalid or unfittable input (see field_errors)
        ├── TooManyRequests           429
        └── ServerError               5xx  (a 500 is a bug in the service: please report it)
            └── ServiceUnavailable    503  overloaded or starting; retried by the client
                └── ComputeTimeout    503  this request needs more than the service's compute
                                           limit (problem code "timeout"); never retried:
                                           send less per request instead

Retries: the client retries a call (``retries`` times, exponential backoff,
``Retry-After`` honoured up to the backoff cap) only when repeating it cannot
do harm and may help: on :class:`ServiceUnavailable` (but not
:class:`ComputeTimeout`) and :class:`ConnectError` for every
endpoint (they are all pure computations — nothing is stored server side),
and on :class:`RequestTimeout` only for GET requests. A streamed NDJSON batch
is never retried, because its input iterator has already been consumed; an
exception raised by that iterator itself is not wrapped: it reaches the caller
unchanged, and the half-sent body is aborted so it can never pass as complete.
After the last attempt the last error is raised; ``error.attempts`` says how
many attempts were made.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any


class CurvewiseError(Exception):
    """Base class of every error raised by :mod:`curvewise_client`."""

    attempts: int = 1


class InputError(CurvewiseError, ValueError):
    """An argument the client cannot send; nothing was sent (also a :class:`ValueError`)."""


class TransportError(CurvewiseError):
    """No usable HTTP answer (connection, timeout or protocol failure)."""


class ConnectError(TransportError):
    """The server could not be reached."""


class RequestTimeout(TransportError, TimeoutError):
    """No complete answer arrived within the client's timeout."""


class ProtocolError(TransportError):
    """The answer breaks HTTP or the contract (for example a body that is not JSON)."""


@dataclass(frozen=True, slots=True)
class Problem:
    """RFC 9457 problem details as sent by the service.

    ``errors`` maps a field path of the request (``"y"``, ``"model.degree"``,
    ``"series[3].x"``) to the service's messages for it; ``extra`` keeps any
    other members of the problem object.
    """

    type: str
    title: str
    status: int
    detail: str
    instance: str | None = None
    errors: Mapping[str, tuple[str, ...]] = field(default_factory=dict)
    extra: Mapping[str, Any] = field(default_factory=dict)

    @classmethod
    def from_json(cls, body: Mapping[str, Any], status: int) -> Problem:
        """Build from a decoded problem+json object (tolerant of missing members)."""
        known = {"type", "title", "status", "detail", "instance", "errors"}
        errors = body.get("errors") or {}
        if not isinstance(errors, Mapping):
            errors = {"_body": errors}
        return cls(
            type=str(body.get("type") or "about:blank"),
            title=str(body.get("title") or ""),
            status=int(body.get("status") or status),
            detail=str(body.get("detail") or ""),
            instance=body.get("instance"),
            errors={str(k): tuple(v) if isinstance(v, (list, tuple)) else (str(v),)
                    for k, v in errors.items()},
            extra={k: v for k, v in body.items() if k not in known},
        )


class ApiError(CurvewiseError):
    """The service answered with an error status and problem details."""

    def __init__(self, problem: Problem, *, headers: Mapping[str, str] | None = None) -> None:
        self.problem = problem
        self.status = problem.status
        self.headers = dict(headers or {})
        text = f"{problem.status} {problem.title}: {problem.detail}".strip()
        if problem.errors:
            fields = "; ".join(f"{k}: {' '.join(v)}" for k, v in problem.errors.items())
            text += f" [{fields}]"
        super().__init__(text)

    @property
    def field_errors(self) -> Mapping[str, tuple[str, ...]]:
        """Field path -> the service's messages for that field."""
        return self.problem.errors


class BadRequest(ApiError):
    """400: the body could not be parsed."""


class Unauthorized(ApiError):
    """401: a bearer token is required or was not accepted."""


class Forbidden(ApiError):
    """403: the token is not allowed to do this."""


class NotFound(ApiError):
    """404: no such endpoint (check the base URL)."""


class PayloadTooLarge(ApiError):
    """413: the body or the number of points is over a service limit."""


class UnsupportedMediaType(ApiError):
    """415: the Content-Type is not one the endpoint accepts."""


class UnprocessableInput(ApiError):
    """422: the input is invalid or cannot be fitted; see ``field_errors``."""


class TooManyRequests(ApiError):
    """429: slow down."""


class ServerError(ApiError):
    """5xx: the service failed. A 500 is always a bug in the service."""


class ServiceUnavailable(ServerError):
    """503: the service is overloaded or not ready; retried automatically."""


class ComputeTimeout(ServiceUnavailable):
    """503 with problem code ``timeout``: the request is too heavy for the compute limit."""


_BY_STATUS: dict[int, type[ApiError]] = {
    400: BadRequest,
    401: Unauthorized,
    403: Forbidden,
    404: NotFound,
    413: PayloadTooLarge,
    415: UnsupportedMediaType,
    422: UnprocessableInput,
    429: TooManyRequests,
    503: ServiceUnavailable,
}


def api_error_for(status: int, problem: Problem,
                  headers: Mapping[str, str] | None = None) -> ApiError:
    """The most specific :class:`ApiError` subclass for ``status``."""
    if status == 503 and problem.extra.get("code") == "timeout":
        return ComputeTimeout(problem, headers=headers)
    cls = _BY_STATUS.get(status) or (ServerError if status >= 500 else ApiError)
    return cls(problem, headers=headers)
