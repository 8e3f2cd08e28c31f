"""Sending one request: headers, retries with backoff, error answers as exceptions."""

from __future__ import annotations

import json
import time
from collections.abc import Callable
from typing import Any

from curvewise_client import __version__
from curvewise_client.bodies import encode
from curvewise_client.errors import (
    ApiError,
    ComputeTimeout,
    ConnectError,
    CurvewiseError,
    InputError,
    Problem,
    ProtocolError,
    RequestTimeout,
    ServiceUnavailable,
    api_error_for,
)
from curvewise_client.transport import HTTPTransport, Response

JSON = "application/json"


class Caller:
    """The connection settings of a client and the one way it sends a request.

    :class:`curvewise_client.Client` documents the parameters.
    """

    def __init__(self, base_url: str, token: str | None = None, *, timeout: float = 30.0,
                 retries: int = 2, backoff: float = 0.25, backoff_cap: float = 4.0,
                 transport: Any = None, sleep: Callable[[float], None] = time.sleep) -> None:
        if not isinstance(base_url, str) or not base_url.startswith(("http://", "https://")):
            raise InputError(f"base_url must be an http(s) URL such as 'http://127.0.0.1:8000', "
                             f"not {base_url!r}")
        if isinstance(retries, bool) or not isinstance(retries, int) or not 0 <= retries <= 10:
            raise InputError(f"retries must be an integer between 0 and 10, not {retries!r}")
        _seconds("timeout", timeout, least=0.0, equal=False)
        _seconds("backoff", backoff)
        _seconds("backoff_cap", backoff_cap)
        if token is not None and not isinstance(token, str):
            raise InputError(f"token must be a string, not a {type(token).__name__}")
        self.base_url = base_url.rstrip("/")
        self.token = token
        self.timeout = timeout
        self.retries = retries
        self.backoff = backoff
        self.backoff_cap = backoff_cap
        self.transport = transport if transport is not None else HTTPTransport()
        self._sleep = sleep

    def _json(self, method: str, path: str, payload: Any = None) -> Any:
        body = None if payload is None else encode(payload)
        response = self._request(method, path, body)
        data = response.read()
        if response.content_type not in (JSON, "application/problem+json"):
            raise ProtocolError(f"{path} answered {response.content_type!r}, not JSON")
        try:
            return json.loads(data)
        except ValueError as exc:
            raise ProtocolError(f"{path}: the body is not valid JSON: {exc}") from exc

    def _request(self, method: str, path: str, body: Any, *, accept: str = JSON,
                 content_type: str = JSON, retry: bool = True) -> Response:
        headers = {"Accept": accept, "User-Agent": f"curvewise-client/{__version__}"}
        if body is not None:
            headers["Content-Type"] = content_type
        if self.token:
            headers["Authorization"] = f"Bearer {self.token}"
        url = self.base_url + path
        attempts = self.retries + 1 if retry else 1
        for attempt in range(1, attempts + 1):
            last = attempt == attempts
            try:
                response = self.transport.send(method, url, headers, body, self.timeout)
            except (ConnectError, RequestTimeout) as exc:
                exc.attempts = attempt
                safe = isinstance(exc, ConnectError) or method == "GET"
                if last or not safe:
                    raise
                self._sleep(self._pause(attempt, None))
                continue
            if response.status < 400:
                return response
            error = _api_error(response)
            error.attempts = attempt
            if isinstance(error, ServiceUnavailable) and not isinstance(
                    error, ComputeTimeout) and not last:
                self._sleep(self._pause(attempt, error.headers.get("retry-after")))
                continue
            raise error
        raise CurvewiseError("unreachable")  # pragma: no cover - the loop always returns/raises

    def _pause(self, attempt: int, retry_after: str | None) -> float:
        pause = min(self.backoff * 2 ** (attempt - 1), self.backoff_cap)
        if retry_after and retry_after.strip().isdigit():
            pause = min(max(pause, float(retry_after)), self.backoff_cap)
        return pause



def _seconds(name: str, value: Any, least: float = 0.0, equal: bool = True) -> None:
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not (
            value >= least if equal else value > least):
        raise InputError(f"{name} must be a number of seconds {'>=' if equal else '>'} {least:g},"
                         f" not {value!r}")


def _api_error(response: Response) -> ApiError:
    raw = response.read()
    try:
        body = json.loads(raw) if raw else {}
    except ValueError:
        body = {}
    if not isinstance(body, dict) or "title" not in body:
        text = raw.decode("utf-8", "replace").strip()[:500]
        body = {"title": f"HTTP {response.status}", "status": response.status,
                "detail": text or "the service sent no problem details"}
    return api_error_for(response.status, Problem.from_json(body, response.status),
                         response.headers)
