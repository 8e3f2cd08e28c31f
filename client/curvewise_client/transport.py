"""How bytes reach the service over HTTP (standard library), and the answer they get.

Transports (this HTTP one, and :class:`curvewise_client.wsgi.WSGITransport` for an
app in-process) have one method, ``send(method, url, headers, body, timeout)``,
returning a :class:`Response`. ``body`` is ``None``, ``bytes`` (or a ``bytearray`` or
``memoryview``), or an iterable of ``bytes`` chunks (sent with chunked transfer
encoding while the answer is read, so a long NDJSON stream never deadlocks on full
socket buffers).
Transports raise only :mod:`curvewise_client.errors` transport errors; HTTP
error statuses are returned, not raised — the client decides what they mean.
"""

from __future__ import annotations

import http.client
import socket
import threading
from collections.abc import Callable, Iterable, Iterator
from urllib.parse import urlsplit

from curvewise_client.errors import ConnectError, ProtocolError, RequestTimeout

Body = bytes | bytearray | memoryview | Iterable[bytes] | None


class Response:
    """Status, lower-cased headers, and a body read whole or line by line."""

    def __init__(self, status: int, headers: dict[str, str], chunks: Iterator[bytes],
                 close: Callable[[], None] = lambda: None,
                 readline: Callable[[], bytes] | None = None,
                 check: Callable[[], None] = lambda: None) -> None:
        self.status = status
        self.headers = headers
        self._chunks = chunks
        self._close = close
        self._readline = readline
        self._check = check  # raises the caller's own body-iterator error, if there was one

    @property
    def content_type(self) -> str:
        """The media type without parameters, lower-cased (``""`` when absent)."""
        return self.headers.get("content-type", "").split(";")[0].strip().lower()

    def read(self) -> bytes:
        """The whole body; closes the response."""
        try:
            data = b"".join(self._chunks)
            self._check()
            return data
        finally:
            self.close()

    def iter_lines(self) -> Iterator[bytes]:
        """Non-empty body lines without their line ends, as they arrive; closes at the end."""
        try:
            if self._readline is not None:
                while line := self._readline():
                    if line.strip():
                        yield line.rstrip(b"\r\n")
                self._check()
                return
            pending = b""
            for chunk in self._chunks:
                pending += chunk
                *lines, pending = pending.split(b"\n")
                yield from (line.rstrip(b"\r") for line in lines if line.strip())
            if pending.strip():
                yield pending.rstrip(b"\r")
            self._check()
        finally:
            self.close()

    def close(self) -> None:
        """Release the connection (idempotent)."""
        close, self._close = self._close, (lambda: None)
        close()


class HTTPTransport:
    """HTTP/1.1 over :mod:`http.client`: one connection per call, no proxies, no extra packages.

    ``timeout`` bounds connecting and each wait for data (seconds).
    """

    def send(self, method: str, url: str, headers: dict[str, str], body: Body,
             timeout: float | None) -> Response:
        parts = urlsplit(url)
        if parts.scheme not in ("http", "https") or not parts.hostname:
            raise ConnectError(f"not an http(s) URL: {url!r}")
        conn_cls = http.client.HTTPSConnection if parts.scheme == "https" else (
            http.client.HTTPConnection)
        conn = conn_cls(parts.hostname, parts.port, timeout=timeout)
        target = (parts.path or "/") + (f"?{parts.query}" if parts.query else "")
        writer: threading.Thread | None = None
        try:
            if body is None or isinstance(body, (bytes, bytearray, memoryview)):
                conn.request(method, target, body=body, headers=headers)
            else:
                conn.putrequest(method, target, skip_accept_encoding=True)
                for key, value in {**headers, "Transfer-Encoding": "chunked"}.items():
                    conn.putheader(key, value)
                conn.endheaders()
                writer = _ChunkWriter(conn, body)
                writer.start()
            raw = conn.getresponse()
        except TimeoutError as exc:
            conn.close()
            _raise_source_error(writer)
            raise RequestTimeout(f"{method} {url}: no answer within {timeout} s") from exc
        except (ConnectionError, OSError, http.client.HTTPException) as exc:
            conn.close()
            _raise_source_error(writer)
            cause = writer.error if writer is not None and writer.error is not None else exc
            raise ConnectError(f"{method} {url}: {type(cause).__name__}: {cause}") from cause
        headers_out = {k.lower(): v for k, v in raw.getheaders()}

        def close() -> None:
            raw.close()
            conn.close()
            if writer is not None:
                writer.join(timeout=5.0)

        def check() -> None:
            _raise_source_error(writer)

        return Response(raw.status, headers_out, _guarded(_read_chunks(raw), url, timeout, writer),
                        close=close, readline=_guarded_readline(raw, url, timeout, writer),
                        check=check)


def _raise_source_error(writer: _ChunkWriter | None) -> None:
    """Re-raise, in the caller's thread, an exception from the caller's own body iterator."""
    if writer is not None:
        writer.join(timeout=1.0)
        if writer.source_error is not None:
            raise writer.source_error


class _ChunkWriter(threading.Thread):
    """Sends a chunked body while the caller reads the answer (full duplex)."""

    def __init__(self, conn: http.client.HTTPConnection, chunks: Iterable[bytes]) -> None:
        super().__init__(name="curvewise-body-writer", daemon=True)
        self.conn, self.chunks = conn, chunks
        self.error: BaseException | None = None          # the socket failed
        self.source_error: BaseException | None = None   # the caller's iterator failed

    def run(self) -> None:
        iterator = iter(self.chunks)
        while True:
            try:
                chunk = next(iterator)
            except StopIteration:
                break
            except BaseException as exc:  # noqa: BLE001 - re-raised in the caller's thread
                self.source_error = exc
                self._abort()  # the body is incomplete: never let it pass as a whole one
                return
            try:
                if chunk:
                    self.conn.send(b"%X\r\n%s\r\n" % (len(chunk), chunk))
            except OSError as exc:  # reported through the reading side
                self.error = exc
                return
        try:
            self.conn.send(b"0\r\n\r\n")
        except OSError as exc:
            self.error = exc

    def _abort(self) -> None:
        sock = self.conn.sock
        if sock is not None:
            try:
                sock.shutdown(socket.SHUT_RDWR)
            except OSError:
                pass


def _read_chunks(raw: http.client.HTTPResponse, size: int = 65536) -> Iterator[bytes]:
    while chunk := raw.read(size):
        yield chunk


def _guarded(chunks: Iterator[bytes], url: str, timeout: float | None,
             writer: _ChunkWriter | None) -> Iterator[bytes]:
    try:
        yield from chunks
    except TimeoutError as exc:
        _raise_source_error(writer)
        raise RequestTimeout(f"{url}: body not complete within {timeout} s") from exc
    except (http.client.HTTPException, OSError) as exc:
        _raise_source_error(writer)
        raise ProtocolError(f"{url}: broken response body: {exc!r}") from exc


def _guarded_readline(raw: http.client.HTTPResponse, url: str, timeout: float | None,
                      writer: _ChunkWriter | None) -> Callable[[], bytes]:
    def readline() -> bytes:
        try:
            return raw.readline()
        except TimeoutError as exc:
            _raise_source_error(writer)
            raise RequestTimeout(f"{url}: next line not within {timeout} s") from exc
        except (http.client.HTTPException, OSError) as exc:
            _raise_source_error(writer)
            raise ProtocolError(f"{url}: broken response body: {exc!r}") from exc
    return readline
