"""Calling a WSGI application in-process through the client: no sockets, no server."""

from __future__ import annotations

import io
import sys
from collections.abc import Callable, Iterator
from urllib.parse import unquote, urlsplit

from curvewise_client.errors import ProtocolError
from curvewise_client.transport import Body, Response


class WSGITransport:
    """Calls a WSGI application in-process (tests, notebooks): no sockets, no server.

    ``Client("http://test", transport=WSGITransport(app))``. An iterable body
    is fed to the app lazily as a terminated input stream, and the app's
    answer is consumed lazily too, so NDJSON streaming behaves as over HTTP.
    ``timeout`` is ignored.
    """

    def __init__(self, app: Callable, *, script_name: str = "") -> None:
        self.app = app
        self.script_name = script_name

    def send(self, method: str, url: str, headers: dict[str, str], body: Body,
             timeout: float | None) -> Response:
        parts = urlsplit(url)
        streamed = body is not None and not isinstance(body, (bytes, bytearray, memoryview))
        source = _IterReader(iter(body)) if streamed else None
        stream = io.BufferedReader(source) if source is not None else io.BytesIO(body or b"")
        environ = {
            "REQUEST_METHOD": method,
            "SCRIPT_NAME": self.script_name,
            "PATH_INFO": unquote(parts.path or "/"),
            "QUERY_STRING": parts.query,
            "SERVER_NAME": parts.hostname or "localhost",
            "SERVER_PORT": str(parts.port or (443 if parts.scheme == "https" else 80)),
            "SERVER_PROTOCOL": "HTTP/1.1",
            "REMOTE_ADDR": "127.0.0.1",
            "wsgi.version": (1, 0),
            "wsgi.url_scheme": parts.scheme or "http",
            "wsgi.input": stream,
            "wsgi.input_terminated": streamed,
            "wsgi.errors": sys.stderr,
            "wsgi.multithread": False,
            "wsgi.multiprocess": False,
            "wsgi.run_once": False,
        }
        if not streamed:
            environ["CONTENT_LENGTH"] = str(len(body or b""))
        for key, value in headers.items():
            name = key.upper().replace("-", "_")
            if name in ("CONTENT_TYPE", "CONTENT_LENGTH"):
                environ[name] = value
            else:
                environ[f"HTTP_{name}"] = value
        captured: dict = {}

        def start_response(status, response_headers, exc_info=None):
            captured["status"] = int(status.split(" ", 1)[0])
            captured["headers"] = {k.lower(): v for k, v in response_headers}
            return lambda data: captured.setdefault("written", []).append(data)

        app_iter = self.app(environ, start_response)
        iterator = iter(app_iter)
        first = next(iterator, None)  # WSGI apps may call start_response lazily
        if source is not None and source.error is not None:
            # the caller's own iterator failed while the app read it: that error, not the
            # app's answer to a broken body (as over HTTP)
            getattr(app_iter, "close", lambda: None)()
            raise source.error
        if "status" not in captured:
            raise ProtocolError(f"{method} {url}: the app never called start_response")
        chunks = _prepend(captured.get("written", []), first, iterator)
        return Response(captured["status"], captured["headers"], chunks,
                        close=getattr(app_iter, "close", lambda: None))


def _prepend(written: list, first, rest: Iterator[bytes]) -> Iterator[bytes]:
    yield from written
    if first is not None:
        yield first
    yield from rest


class _IterReader(io.RawIOBase):
    """A readable stream over an iterator of bytes chunks."""

    def __init__(self, chunks: Iterator[bytes]) -> None:
        self._chunks, self._pending = chunks, b""
        self.error: BaseException | None = None  # what the caller's iterator raised

    def readable(self) -> bool:
        return True

    def readinto(self, buffer) -> int:
        while not self._pending:
            try:
                chunk = next(self._chunks, None)
            except Exception as exc:
                self.error = exc
                raise
            if chunk is None:
                return 0
            self._pending = bytes(chunk)
        size = min(len(buffer), len(self._pending))
        buffer[:size], self._pending = self._pending[:size], self._pending[size:]
        return size
