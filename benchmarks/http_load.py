"""A small HTTP load generator for the benchmarks: raw requests, one at a time or many in flight.

One client process driving non-blocking sockets from one event loop (``selectors``) costs the
server under test far less CPU than several client processes would.
"""

from __future__ import annotations

import selectors
import socket
import time

import numpy as np


def raw_request(path: str, body: bytes) -> bytes:
    head = (f"POST {path} HTTP/1.1\r\nHost: 127.0.0.1\r\nContent-Type: application/json\r\n"
            f"Content-Length: {len(body)}\r\nConnection: close\r\n\r\n")
    return head.encode() + body


def one_request(port: int, payload: bytes) -> tuple[float, bytes]:
    start = time.perf_counter()
    with socket.create_connection(("127.0.0.1", port), timeout=30.0) as sock:
        sock.sendall(payload)
        chunks = []
        while True:
            chunk = sock.recv(1 << 20)
            if not chunk:
                break
            chunks.append(chunk)
    return time.perf_counter() - start, b"".join(chunks)


def load(port: int, payload: bytes, connections: int, seconds: float,
         max_requests: int = 500_000) -> dict:
    """Keep ``connections`` requests in flight for ``seconds`` from one event loop.

    One client process (``selectors``) costs the server's two cores far less CPU than
    eight client processes would. Each request is a fresh connection (gunicorn's sync
    workers close after every answer). Returns throughput and latency percentiles.
    """
    sel = selectors.DefaultSelector()
    latencies: list[float] = []
    errors = 0

    def launch():
        sock = socket.socket(socket.AF_INET, socket.SOCK_STREAM)
        sock.setblocking(False)
        sock.connect_ex(("127.0.0.1", port))
        state = {"start": time.perf_counter(), "out": memoryview(payload), "in": []}
        sel.register(sock, selectors.EVENT_WRITE, state)

    start = time.perf_counter()
    stop = start + seconds
    for _ in range(connections):
        launch()
    while sel.get_map():
        for key, events in sel.select(timeout=5.0):
            sock, state = key.fileobj, key.data
            try:
                if events & selectors.EVENT_WRITE:
                    sent = sock.send(state["out"])
                    state["out"] = state["out"][sent:]
                    if not state["out"]:
                        sel.modify(sock, selectors.EVENT_READ, state)
                    continue
                chunk = sock.recv(1 << 20)
            except (BlockingIOError, InterruptedError):
                continue
            except OSError:
                chunk, state["in"] = b"", [b"error"]
            if chunk:
                state["in"].append(chunk)
                continue
            sel.unregister(sock)
            sock.close()
            latencies.append(time.perf_counter() - state["start"])
            if not b"".join(state["in"][:1]).startswith(b"HTTP/1.1 200"):
                errors += 1
            if time.perf_counter() < stop and len(latencies) < max_requests:
                launch()
    wall = time.perf_counter() - start
    ms = np.asarray(latencies) * 1e3
    return {"rps": ms.size / wall, "n": int(ms.size), "errors": errors,
            "p50": float(np.percentile(ms, 50)), "p99": float(np.percentile(ms, 99))}
