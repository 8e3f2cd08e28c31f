"""A tiny scripted HTTP server on loopback for client tests (503s, timeouts, streaming)."""

from __future__ import annotations

import json
import threading
import time
from collections import deque
from dataclasses import dataclass, field
from http.server import BaseHTTPRequestHandler, ThreadingHTTPServer


@dataclass
class Reply:
    """One scripted answer: status, headers, body, and an optional delay before answering."""

    status: int = 200
    body: bytes = b"{}"
    headers: dict = field(default_factory=lambda: {"Content-Type": "application/json"})
    delay: float = 0.0


@dataclass
class Seen:
    method: str
    path: str
    headers: dict
    body: bytes


class StubServer:
    """Answers requests from a script (a queue of :class:`Reply`); records what it saw.

    A request to ``/echo-lines`` with a chunked body is answered line by line
    as each line arrives (chunked response), to test full-duplex streaming.
    """

    def __init__(self) -> None:
        self.replies: deque[Reply] = deque()
        self.seen: list[Seen] = []
        stub = self

        class Handler(BaseHTTPRequestHandler):
            protocol_version = "HTTP/1.1"
            timeout = 10

            def log_message(self, *args):  # keep test output clean
                pass

            def _handle(self):
                if self.path == "/echo-lines":
                    return self._echo_lines()
                length = int(self.headers.get("Content-Length") or 0)
                body = self.rfile.read(length) if length else b""
                stub.seen.append(Seen(self.command, self.path, dict(self.headers), body))
                reply = stub.replies.popleft() if stub.replies else Reply(
                    500, b'{"title": "stub script exhausted"}')
                if reply.delay:
                    time.sleep(reply.delay)
                try:
                    self.send_response(reply.status)
                    for key, value in reply.headers.items():
                        self.send_header(key, value)
                    self.send_header("Content-Length", str(len(reply.body)))
                    self.end_headers()
                    self.wfile.write(reply.body)
                except (BrokenPipeError, ConnectionResetError):
                    pass  # the client gave up first (timeout tests): expected

            def _echo_lines(self):
                try:
                    self._echo_lines_unguarded()
                except (ValueError, OSError):
                    pass  # the client aborted its body (iterator-error test): expected

            def _echo_lines_unguarded(self):
                stub.seen.append(Seen(self.command, self.path, dict(self.headers), b""))
                self.send_response(200)
                self.send_header("Content-Type", "application/x-ndjson")
                self.send_header("Transfer-Encoding", "chunked")
                self.end_headers()
                pending = b""
                for _ in range(10_000):  # bounded: at most 10k chunks
                    size = int(self.rfile.readline().strip() or b"0", 16)
                    chunk = self.rfile.read(size) if size else b""
                    self.rfile.readline()  # CRLF after the chunk
                    if not size:
                        break
                    pending += chunk
                    *lines, pending = pending.split(b"\n")
                    for line in lines:
                        data = json.loads(line)
                        out = json.dumps({"id": data.get("id"), "status": "ok",
                                          "fit": {"echo": data}}).encode() + b"\n"
                        self.wfile.write(b"%X\r\n%s\r\n" % (len(out), out))
                        self.wfile.flush()
                self.wfile.write(b"0\r\n\r\n")

            do_GET = do_POST = _handle

        self.server = ThreadingHTTPServer(("127.0.0.1", 0), Handler)
        self.server.daemon_threads = True
        self.url = f"http://127.0.0.1:{self.server.server_address[1]}"
        self.thread = threading.Thread(target=self.server.serve_forever, args=(0.02,),
                                       daemon=True)

    def script(self, *replies: Reply) -> StubServer:
        self.replies.extend(replies)
        return self



def problem(status: int, title: str, detail: str, errors: dict | None = None) -> bytes:
    body = {"type": "https://curvewise.dev/problems/x", "title": title, "status": status,
            "detail": detail}
    if errors:
        body["errors"] = errors
    return json.dumps(body).encode()


PROBLEM_HEADERS = {"Content-Type": "application/problem+json"}
