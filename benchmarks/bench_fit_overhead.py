"""Per-request overhead of /v1/fit against a bare Flask+orjson echo app, side by side.

Two gunicorn servers run at once on 127.0.0.1, each with the project's gunicorn settings
(``service/runtime/gunicorn_conf.py``: 2 sync workers, same hooks, same log level):

- *echo*: a separate bare Flask app (:func:`echo_app`) whose one route decodes the JSON body
  with orjson and encodes it back; no middleware, no metrics, no logs;
- *curvewise*: the production app (``service.app:create_app()``), every feature on
  (request ids, JSON access log, Prometheus metrics, security headers, deadline guard).

The load generator keeps 8 connections busy on one server at a time, alternating rounds
(echo, curvewise, echo, ...) so drift on a shared machine affects both alike. It is ``wrk``
(Debian: ``apt-get install -y wrk``) when on PATH, else this repository's one-thread
event-loop client (``benchmarks/http_load.py:load``); the first line printed says which.
The request body is the same for both: n = 50 seeded points, degree chosen from 1..4 by
sequential F, a 200-point grid.

Printed: requests/s, p99 latency and server CPU time per request of each server per round
(master, live workers and reaped ones, from /proc: a worker replaced after ``max_requests``
stays counted), the median ratio of throughputs (target >= 0.5, issue 17), the median p99
of both, and the ratio of CPU time per request (unaffected by other work on a
shared machine, unlike req/s). Nothing is asserted.

``--baseline CHECKOUT`` adds a third server, /v1/fit from another checkout (say the commit
before a change, exported with ``git archive``), to the same alternating rounds, so before and
after are measured side by side under the same machine load.

Run: ``.venv/bin/python benchmarks/bench_fit_overhead.py [--seconds 4 --rounds 5]``.
"""

from __future__ import annotations

import argparse
import os
import re
import shutil
import socket
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
if str(ROOT) not in sys.path:
    sys.path.insert(0, str(ROOT))

WORKERS = 2
CONNECTIONS = 8
ECHO_PATH = "/echo"
FIT_PATH = "/v1/fit"


def echo_app():
    """The bare comparison app: Flask, one route, orjson decode + encode. Nothing else."""
    import orjson
    from flask import Flask, Response, request

    app = Flask("echo")

    @app.post(ECHO_PATH)
    def echo():
        return Response(orjson.dumps(orjson.loads(request.get_data())),
                        mimetype="application/json")

    return app


def request_body() -> bytes:
    """n = 50 seeded points, degree chosen from 1..4 (sequential F), 200-point grid: the
    same /v1/fit body as bench_http's (one definition for both benchmarks)."""
    from benchmarks.bench_http import small_body

    return small_body()


def free_port() -> int:
    with socket.socket() as sock:
        sock.bind(("127.0.0.1", 0))
        return sock.getsockname()[1]


def post(port: int, path: str, body: bytes, timeout: float = 10.0) -> bytes:
    """One POST on a fresh connection; the raw answer."""
    head = (f"POST {path} HTTP/1.1\r\nHost: 127.0.0.1\r\nContent-Type: application/json\r\n"
            f"Content-Length: {len(body)}\r\nConnection: close\r\n\r\n").encode()
    with socket.create_connection(("127.0.0.1", port), timeout=timeout) as sock:
        sock.sendall(head + body)
        chunks = []
        while chunk := sock.recv(1 << 16):
            chunks.append(chunk)
    return b"".join(chunks)


class Server:
    """One gunicorn with the project's settings serving ``target`` on a free port."""

    def __init__(self, name: str, target: str, workdir: Path, root: Path = ROOT) -> None:
        self.name, self.port = name, free_port()
        self.log_path = workdir / f"{name}.log"
        env = {**os.environ, "PYTHONPATH": str(root), "PYTHONUNBUFFERED": "1"}
        command = [sys.executable, "-m", "gunicorn", "-c", "python:service.runtime.gunicorn_conf",
                   "--workers", str(WORKERS), "--bind", f"127.0.0.1:{self.port}", target]
        self.log = open(self.log_path, "wb")  # noqa: SIM115 - closed in stop()
        self.process = subprocess.Popen(command, cwd=root, env=env, stdout=self.log,
                                        stderr=subprocess.STDOUT, stdin=subprocess.DEVNULL,
                                        start_new_session=True)

    def wait(self, path: str, body: bytes, timeout: float) -> None:
        """Wait (bounded) until ``path`` answers 200 on this server."""
        deadline = time.monotonic() + timeout
        while time.monotonic() < deadline:
            if self.process.poll() is not None:
                break
            try:
                if post(self.port, path, body).startswith(b"HTTP/1.1 200"):
                    return
            except OSError:
                pass
            time.sleep(0.2)
        self.stop()
        tail = self.log_path.read_text(errors="replace")[-3000:]
        raise SystemExit(f"{self.name} server did not answer 200 on {path}:\n{tail}")

    def cpu_seconds(self) -> tuple[float, frozenset[int]]:
        """CPU time (user + system, seconds) used so far by this server: the master, its live
        workers, and the workers that have exited and been reaped (the master's ``cutime`` and
        ``cstime``); and the live workers' pids.

        A worker replaced during a round (``max_requests``) leaves the live list, but its time
        is then counted in the master's reaped-children fields, so the total never goes down.
        """
        master = self.process.pid
        try:
            children = Path(f"/proc/{master}/task/{master}/children").read_text().split()
        except OSError:
            return float("nan"), frozenset()
        workers = frozenset(int(p) for p in children)
        total = 0
        for pid in (master, *workers):
            try:
                fields = Path(f"/proc/{pid}/stat").read_text().rsplit(")", 1)[1].split()
            except OSError:
                continue
            # utime, stime; for the master also cutime, cstime (reaped children: exited workers)
            total += int(fields[11]) + int(fields[12])
            if pid == master:
                total += int(fields[13]) + int(fields[14])
        return total / os.sysconf("SC_CLK_TCK"), workers

    def stop(self) -> None:
        if self.process.poll() is None:
            os.killpg(self.process.pid, 15)
            try:
                self.process.wait(timeout=30)
            except subprocess.TimeoutExpired:
                os.killpg(self.process.pid, 9)
                self.process.wait(timeout=5)
        self.log.close()


# ---- load generators ----------------------------------------------------------------------------

_WRK_SCRIPT = """wrk.method = "POST"
wrk.headers["Content-Type"] = "application/json"
local f = assert(io.open("{body}", "rb"))
wrk.body = f:read("*a")
f:close()
"""
_UNITS = {"us": 1e-3, "ms": 1.0, "s": 1e3, "m": 60e3}


def _ms(text: str) -> float:
    number, unit = re.fullmatch(r"([\d.]+)(us|ms|s|m)", text).groups()
    return float(number) * _UNITS[unit]


def wrk_load(port: int, path: str, script: Path, seconds: float) -> dict:
    """One wrk run (1 thread, 8 connections): requests/s, p99 ms, non-2xx and socket errors."""
    out = subprocess.run(["wrk", "-t1", f"-c{CONNECTIONS}", f"-d{seconds:g}s", "--latency",
                          "-s", str(script), f"http://127.0.0.1:{port}{path}"],
                         capture_output=True, text=True, timeout=seconds + 60, check=True).stdout
    rps = float(re.search(r"Requests/sec:\s+([\d.]+)", out).group(1))
    count = int(re.search(r"(\d+) requests in", out).group(1))
    p99 = _ms(re.search(r"^\s+99%\s+(\S+)", out, re.M).group(1))
    bad = re.search(r"Non-2xx or 3xx responses:\s+(\d+)", out)
    sock = re.search(r"Socket errors: connect (\d+), read (\d+), write (\d+), timeout (\d+)", out)
    errors = (int(bad.group(1)) if bad else 0) + (
        sum(int(v) for v in sock.groups()[:1] + sock.groups()[2:]) if sock else 0)
    return {"rps": rps, "p99": p99, "errors": errors, "count": count}


def python_load(port: int, path: str, body: bytes, seconds: float) -> dict:
    """The fallback: the one-thread event-loop client of benchmarks/http_load.py, 8 connections."""
    from benchmarks.http_load import load, raw_request

    result = load(port, raw_request(path, body), CONNECTIONS, seconds)
    return {"rps": result["rps"], "p99": result["p99"], "errors": result["errors"],
            "count": result["n"]}


def median(values: list[float]) -> float:
    ordered = sorted(values)
    mid = len(ordered) // 2
    return ordered[mid] if len(ordered) % 2 else (ordered[mid - 1] + ordered[mid]) / 2


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--seconds", type=float, default=4.0, help="length of one round")
    parser.add_argument("--rounds", type=int, default=5, help="rounds of each app, alternated")
    parser.add_argument("--python-load", action="store_true",
                        help="use the Python event-loop client even if wrk is installed")
    parser.add_argument("--baseline", type=Path, metavar="CHECKOUT",
                        help="also serve /v1/fit from another checkout of the repository (e.g. "
                             "an older commit exported with git archive), in the same rounds")
    args = parser.parse_args(argv)
    body = request_body()
    use_wrk = shutil.which("wrk") is not None and not args.python_load
    print("load generator: " + ("wrk (1 thread)" if use_wrk else
                                "Python event-loop client (benchmarks/http_load.py:load)")
          + f", {CONNECTIONS} connections; gunicorn: {WORKERS} workers, settings of "
          "service/runtime/gunicorn_conf.py for every app")
    print(f"cores: {os.cpu_count()}  load average before: {os.getloadavg()[0]:.2f} "
          "(other work on the machine lowers every rate)")
    with tempfile.TemporaryDirectory(prefix="curvewise-bench-") as tmp:
        workdir = Path(tmp)
        (workdir / "body.json").write_bytes(body)
        script = workdir / "post.lua"
        script.write_text(_WRK_SCRIPT.format(body=workdir / "body.json"))
        servers = {"echo": Server("echo", "benchmarks.bench_fit_overhead:echo_app()", workdir),
                   "/v1/fit": Server("curvewise", "service.app:create_app()", workdir)}
        if args.baseline is not None:
            servers["baseline /v1/fit"] = Server("baseline", "service.app:create_app()", workdir,
                                                 root=args.baseline.resolve())
        try:
            for name, server in servers.items():
                server.wait(ECHO_PATH if name == "echo" else FIT_PATH, body,
                            timeout=300.0)  # a cold numba cache: ~1 min
            rounds = run_rounds(servers, body, script, args, use_wrk)
        finally:
            for server in servers.values():
                server.stop()
        log_lines = (workdir / "curvewise.log").read_text(errors="replace").count('"request"')
    report(rounds, log_lines)
    return 0


def run_rounds(servers, body, script, args, use_wrk) -> list[dict]:
    def once(name, seconds):
        server = servers[name]
        path = ECHO_PATH if name == "echo" else FIT_PATH
        cpu, workers = server.cpu_seconds()
        if use_wrk:
            result = wrk_load(server.port, path, script, seconds)
        else:
            result = python_load(server.port, path, body, seconds)
        cpu_after, workers_after = server.cpu_seconds()
        # a worker that exits between the two readings and is not yet reaped is in neither
        # total: never print a negative time, say instead that a worker was replaced
        result["cpu_ms"] = max(cpu_after - cpu, 0.0) / max(result["count"], 1) * 1e3
        result["replaced"] = workers != workers_after
        return result

    for name in servers:  # a short unmeasured round each: every worker warm
        once(name, 1.0)
    rounds = []
    for _ in range(args.rounds):
        rounds.append({name: once(name, args.seconds) for name in servers})
    print(f"rounds: {args.rounds} x {args.seconds:g} s per app, alternated")
    for i, result in enumerate(rounds, 1):
        echo = result["echo"]
        parts = [f"{name} {r['rps']:5.0f} req/s p99 {r['p99']:6.2f} ms cpu {r['cpu_ms']:.2f} ms"
                 + ("" if name == "echo" else f" ratio {r['rps'] / echo['rps']:.2f}")
                 + (f" ({r['errors']} errors)" if r["errors"] else "")
                 + (" (a worker was replaced: its start-up is in cpu)" if r["replaced"] else "")
                 for name, r in result.items()]
        print(f"  round {i}: " + " | ".join(parts))
    return rounds


def report(rounds: list[dict], log_lines: int) -> None:
    print("medians over rounds:")
    for name in rounds[0]:
        rps = median([r[name]["rps"] for r in rounds])
        p99 = median([r[name]["p99"] for r in rounds])
        cpu = median([r[name]["cpu_ms"] for r in rounds])
        print(f"  {name:17s} {rps:6.0f} req/s  p99 {p99:6.2f} ms  server CPU {cpu:.2f} ms/request")
    for name in rounds[0]:
        if name == "echo":
            continue
        ratios = [r[name]["rps"] / r["echo"]["rps"] for r in rounds]
        cpu = [r["echo"]["cpu_ms"] / r[name]["cpu_ms"] for r in rounds]
        print(f"throughput ratio {name} / echo: median {median(ratios):.2f} (rounds: "
              f"{', '.join(f'{v:.2f}' for v in ratios)})  target >= 0.5; ratio of server CPU "
              f"per request, echo / {name}: median {median(cpu):.2f}")
    print("(CPU per request is steadier than req/s when the machine is shared: other work does "
          "not enter it)")
    print(f"curvewise access-log lines written during the run: {log_lines} (logging was on)")


if __name__ == "__main__":
    sys.exit(main())
