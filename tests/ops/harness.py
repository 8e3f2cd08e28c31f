"""Helpers for the live ops tests: a gunicorn server with its pids, raw HTTP, mixed traffic.

Everything talks to 127.0.0.1 only; every loop is bounded in count and time; data come from
seeded generators.
"""

from __future__ import annotations

import http.client
import json
import os
import socket
import threading
import time
from collections import Counter
from contextlib import contextmanager
from dataclasses import dataclass, field
from pathlib import Path
from urllib.parse import urlsplit

import numpy as np

from tests.live_server import live_server

PAGE = os.sysconf("SC_PAGE_SIZE")


def _children(pid: int) -> list[int]:
    try:
        text = Path(f"/proc/{pid}/task/{pid}/children").read_text()
        return [int(p) for p in text.split()]
    except OSError:
        return []


def _find_master(port: int) -> int:
    needle = f"--port\0{port}\0".encode()
    for entry in Path("/proc").iterdir():
        if entry.name.isdigit():
            try:
                cmdline = (entry / "cmdline").read_bytes()
            except OSError:
                continue
            if b"service.cli" in cmdline and needle in cmdline:
                return int(entry.name)
    raise LookupError(f"no gunicorn master serving port {port}")


def rss_bytes(pid: int) -> int | None:
    """Resident set size of ``pid`` (from /proc/<pid>/statm), or None if it is gone."""
    try:
        return int(Path(f"/proc/{pid}/statm").read_text().split()[1]) * PAGE
    except (OSError, IndexError, ValueError):
        return None


@dataclass
class Server:
    """A running gunicorn: base URL, port and master pid."""

    url: str
    master: int

    @property
    def port(self) -> int:
        return urlsplit(self.url).port

    def workers(self) -> list[int]:
        """Current worker pids (children of the master)."""
        return _children(self.master)

    def wait_workers(self, count: int, timeout: float = 20.0, exclude=()) -> list[int]:
        """Wait (bounded) until ``count`` workers run, none of them in ``exclude``."""
        deadline = time.monotonic() + timeout
        while time.monotonic() < deadline:
            pids = [p for p in self.workers() if p not in exclude]
            if len(pids) == count:
                return pids
            time.sleep(0.1)
        raise TimeoutError(f"workers never became {count}: {self.workers()}")


@contextmanager
def server(*, workers: int = 2, env: dict | None = None, log_path: Path | None = None):
    """A live gunicorn (``tests/live_server.py``) with its master pid."""
    with live_server(workers=workers, env=env, log_path=log_path) as url:
        srv = Server(url, _find_master(urlsplit(url).port))
        srv.wait_workers(workers)
        yield srv


def request(url: str, method: str, path: str, body=None, headers: dict | None = None,
            timeout: float = 30.0) -> tuple[int, dict, bytes]:
    """One HTTP request on a fresh connection: (status, headers, body)."""
    parts = urlsplit(url)
    conn = http.client.HTTPConnection(parts.hostname, parts.port, timeout=timeout)
    try:
        payload = body if isinstance(body, (bytes, type(None))) else json.dumps(body).encode()
        hdrs = {"Content-Type": "application/json"} if payload is not None else {}
        hdrs.update(headers or {})
        conn.request(method, path, body=payload, headers=hdrs)
        response = conn.getresponse()
        return response.status, {k.lower(): v for k, v in response.getheaders()}, response.read()
    finally:
        conn.close()


def raw_exchange(port: int, data: bytes, *, timeout: float = 10.0, read_until_close=True) -> bytes:
    """Send raw bytes on a new TCP connection and read the answer (bounded by ``timeout``)."""
    with socket.create_connection(("127.0.0.1", port), timeout=timeout) as sock:
        sock.sendall(data)
        chunks = []
        deadline = time.monotonic() + timeout
        while time.monotonic() < deadline:
            try:
                chunk = sock.recv(65536)
            except (ConnectionResetError, TimeoutError):
                break
            if not chunk:
                break
            chunks.append(chunk)
            if not read_until_close and b"\r\n\r\n" in b"".join(chunks):
                break
        return b"".join(chunks)


def post_while_reading(port: int, path: str, body: bytes, headers: dict | None = None,
                       timeout: float = 60.0) -> tuple[int, bytes]:
    """POST ``body`` from a thread while reading the answer, which may come before the body is
    all sent (the server can answer early and close); returns (status, response body)."""
    head = [f"POST {path} HTTP/1.1", "Host: 127.0.0.1", "Content-Type: application/json",
            f"Content-Length: {len(body)}"] + [f"{k}: {v}" for k, v in (headers or {}).items()]
    sock = socket.create_connection(("127.0.0.1", port), timeout=timeout)

    def send():
        try:
            sock.sendall(("\r\n".join(head) + "\r\n\r\n").encode() + body)
        except OSError:
            pass  # the server answered and closed before taking the whole body

    sender = threading.Thread(target=send, daemon=True)
    sender.start()
    chunks = []
    try:
        while chunk := sock.recv(65536):
            chunks.append(chunk)
    except (ConnectionResetError, TimeoutError):
        pass
    finally:
        sender.join(timeout)
        sock.close()
    answer = b"".join(chunks)
    status_line, _, rest = answer.partition(b"\r\n")
    status = int(status_line.split()[1]) if status_line.startswith(b"HTTP/") else 0
    return status, rest.split(b"\r\n\r\n", 1)[-1]


# ---- mixed traffic ------------------------------------------------------------------------------

def fit_body(rng: np.random.Generator, n: int = 50) -> dict:
    """A seeded quadratic-with-noise series and a selection over degrees 1..4."""
    x = np.sort(rng.uniform(0.0, 10.0, n))
    y = 1.5 + 0.8 * x - 0.05 * x**2 + rng.normal(0.0, 0.3, n)
    return {"x": x.round(6).tolist(), "y": y.round(6).tolist(),
            "model": {"family": "polynomial", "max_degree": 4, "select": "aic"},
            "grid": {"count": 200}}


def mixed_requests(url: str, seed: int = 20261201) -> dict[str, tuple[str, str, object]]:
    """Named requests for every data endpoint the server offers now (from /openapi.json)."""
    rng = np.random.default_rng(seed)
    status, _, raw = request(url, "GET", "/openapi.json")
    assert status == 200
    paths = json.loads(raw)["paths"]
    fit = fit_body(rng)
    out: dict[str, tuple[str, str, object]] = {
        "healthz": ("GET", "/healthz", None),
        "families": ("GET", "/v1/families", None),
        "fit": ("POST", "/v1/fit", fit),
    }
    status, _, raw = request(url, "POST", "/v1/fit", fit)
    assert status == 200, raw[:500]
    document = json.loads(raw)["fitted_model"]
    if "/v1/predict" in paths:
        out["predict"] = ("POST", "/v1/predict",
                          {"fitted_model": document, "x": np.linspace(0, 10, 25).tolist()})
    if "/v1/invert" in paths:
        out["invert"] = ("POST", "/v1/invert", {"fitted_model": document, "y": [2.0, 3.0, 4.0]})
    if "/v1/batch" in paths:
        series = []
        for i in range(20):
            b = fit_body(rng, 40)
            series.append({"id": f"probe-{i:04d}", "x": b["x"], "y": b["y"]})
        out["batch"] = ("POST", "/v1/batch", {"series": series, "model": fit["model"]})
    if "/v1/plot" in paths:
        out["plot"] = ("POST", "/v1/plot", {**fit, "plot": {"width": 400, "height": 300,
                                                            "format": "png"}})
    return out


@dataclass
class LoadResult:
    """What a load run saw."""

    statuses: Counter = field(default_factory=Counter)
    by_name: dict = field(default_factory=dict)
    failures: list = field(default_factory=list)      # (time, name, exception repr)
    latencies: list = field(default_factory=list)      # (time, name, seconds)
    rss: dict = field(default_factory=dict)            # pid -> [(time, bytes)]
    duration: float = 0.0

    def count(self, predicate) -> int:
        return sum(n for status, n in self.statuses.items() if predicate(status))


def run_load(srv: Server, requests_by_name: dict, *, seconds: float, connections: int = 8,
             on_tick=None, max_requests: int = 1_000_000) -> LoadResult:
    """``connections`` threads send the named requests round-robin for ``seconds``.

    Worker RSS is sampled every 0.5 s. ``on_tick(elapsed)`` runs in the sampler thread (used to
    inject faults). Bounded by time and by ``max_requests``.
    """
    result = LoadResult()
    names = sorted(requests_by_name)
    lock = threading.Lock()
    stop = threading.Event()
    start = time.monotonic()
    issued = [0]
    parts = urlsplit(srv.url)
    encoded = {name: (m, p, None if b is None else json.dumps(b).encode())
               for name, (m, p, b) in requests_by_name.items()}

    def client(index: int) -> None:
        k = index
        while not stop.is_set():
            with lock:
                if issued[0] >= max_requests:
                    return
                issued[0] += 1
            name = names[k % len(names)]
            k += 1
            method, path, payload = encoded[name]
            headers = {"Content-Type": "application/json"} if payload is not None else {}
            conn = http.client.HTTPConnection(parts.hostname, parts.port, timeout=30)
            t0 = time.monotonic()
            try:
                conn.request(method, path, body=payload, headers=headers)
                response = conn.getresponse()
                response.read()
                status = response.status
            except (OSError, http.client.HTTPException) as exc:
                with lock:
                    result.failures.append((t0 - start, name, repr(exc)))
                continue
            finally:
                conn.close()
            t1 = time.monotonic()
            with lock:
                result.statuses[status] += 1
                result.by_name.setdefault(name, Counter())[status] += 1
                result.latencies.append((t0 - start, name, t1 - t0))

    threads = [threading.Thread(target=client, args=(i,), daemon=True)
               for i in range(connections)]
    for t in threads:
        t.start()
    try:
        while time.monotonic() - start < seconds:
            elapsed = time.monotonic() - start
            for pid in srv.workers():
                value = rss_bytes(pid)
                if value is not None:
                    result.rss.setdefault(pid, []).append((elapsed, value))
            if on_tick is not None:
                on_tick(elapsed)
            time.sleep(0.5)
    finally:
        stop.set()
        for t in threads:
            t.join(timeout=35)
    result.duration = time.monotonic() - start
    return result


def percentile(values, q: float) -> float:
    return float(np.percentile(np.asarray(values, dtype=float), q)) if values else float("nan")
