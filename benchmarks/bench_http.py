"""HTTP benchmark: /v1/fit against a trivial JSON echo on the same gunicorn, side by side.

1. Two sync gunicorn workers on 127.0.0.1 serve the production app plus an echo route
   (added only here, by :func:`bench_app`; production has none). One event-loop client
   keeps eight connections busy, alternating rounds of /echo and /v1/fit (n = 50, degree
   selected from 1..4, 200-point grid). Printed: throughput of each, their ratio
   (target >= 0.45) and the /v1/fit latency percentiles (target p99 <= 5 ms).
2. A 1,000,000-point /v1/fit (degree 2, 200-point grid, no per-point diagnostics) timed
   against orjson decoding plus encoding the same request payload (target <= 2x).

Run: ``.venv/bin/python benchmarks/bench_http.py`` (or ``make bench``). Everything is
seeded and bounded in time; targets are printed, never asserted.
"""

from __future__ import annotations

import argparse
import os
import subprocess
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))

import numpy as np  # noqa: E402
import orjson  # noqa: E402

from benchmarks.http_load import load, one_request, raw_request  # noqa: E402
from tests.live_server import free_port  # noqa: E402


def bench_app():
    """The production app plus POST /echo (decode the JSON body, encode it back)."""
    from flask import Response, request

    from service.app import create_app

    app = create_app()

    @app.post("/echo")
    def echo():
        return Response(orjson.dumps(orjson.loads(request.get_data())),
                        mimetype="application/json")

    return app


def small_body() -> bytes:
    rng = np.random.default_rng(20261201)
    x = np.linspace(0.0, 10.0, 50)
    y = 1.0 + 0.8 * x - 0.06 * x**2 + rng.normal(0.0, 0.3, x.size)
    return orjson.dumps({"x": x.tolist(), "y": y.tolist(),
                         "model": {"max_degree": 4, "min_degree": 1, "select": "sequential_f"},
                         "grid": {"count": 200}})


def big_body(n: int) -> bytes:
    rng = np.random.default_rng(20261202)
    x = np.linspace(0.0, 100.0, n)
    y = 3.0 + 0.5 * x - 0.002 * x**2 + rng.normal(0.0, 1.0, n)
    return orjson.dumps({"x": x.tolist(), "y": y.tolist(), "model": {"degree": 2},
                         "grid": {"count": 200},
                         "include": ["coefficients", "anova", "statistics", "selection",
                                     "grid", "fitted_model"]})


def start_server(port: int, workers: int) -> subprocess.Popen:
    env = {**os.environ, "PYTHONPATH": str(ROOT), "CURVEWISE_LOG_LEVEL": "WARNING"}
    command = [sys.executable, "-m", "gunicorn", "-c", "python:service.runtime.gunicorn_conf",
               "--workers", str(workers), "--bind", f"127.0.0.1:{port}",
               "benchmarks.bench_http:bench_app()"]
    proc = subprocess.Popen(command, cwd=ROOT, env=env, stdout=subprocess.DEVNULL,
                            stderr=subprocess.DEVNULL, start_new_session=True)
    deadline = time.monotonic() + 30
    while time.monotonic() < deadline:
        try:
            _, answer = one_request(port, b"GET /readyz HTTP/1.1\r\nHost: x\r\n"
                                          b"Connection: close\r\n\r\n")
            if answer.startswith(b"HTTP/1.1 200"):
                return proc
        except OSError:
            time.sleep(0.1)
    proc.kill()
    raise SystemExit("gunicorn did not start")


def stop_server(proc: subprocess.Popen) -> None:
    os.killpg(proc.pid, 15)
    try:
        proc.wait(timeout=20)
    except subprocess.TimeoutExpired:
        os.killpg(proc.pid, 9)
        proc.wait(timeout=5)


def best_of(fn, repeats: int) -> float:
    times = []
    for _ in range(repeats):
        start = time.perf_counter()
        fn()
        times.append(time.perf_counter() - start)
    return min(times)


def field_speed(n: int = 200_000) -> None:
    """The bulk numeric-array field against marshmallow's List(Float), same values."""
    from marshmallow import Schema, fields

    from schemas.fields import NumberArray

    class Bulk(Schema):
        v = NumberArray()

    class PerValue(Schema):
        v = fields.List(fields.Float())

    values = {"v": np.random.default_rng(20261203).normal(size=n).tolist()}
    bulk = best_of(lambda: Bulk().load(values), 3) / n * 1e9
    per_value = best_of(lambda: PerValue().load(values), 1) / n * 1e9
    print(f"array validation per value: NumberArray {bulk:.0f} ns, List(Float) {per_value:.0f} "
          f"ns; {per_value / bulk:.0f}x")


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--seconds", type=float, default=3.0, help="length of one round")
    parser.add_argument("--rounds", type=int, default=3, help="rounds of each route, alternated")
    parser.add_argument("--connections", type=int, default=8)
    parser.add_argument("--points", type=int, default=1_000_000)
    parser.add_argument("--only", choices=("load", "big"), help="run one part only")
    args = parser.parse_args(argv)
    print(f"cores: {os.cpu_count()}  load average before: {os.getloadavg()[0]:.2f} "
          "(other work on the machine inflates latencies)")
    port = free_port()
    server = start_server(port, workers=2)
    try:
        if args.only != "big":
            run_load(port, args)
        if args.only != "load":
            run_big(port, args)
            field_speed()
    finally:
        stop_server(server)
    return 0


def run_load(port: int, args) -> None:
    """Part 1: throughput ratio and latency at ``args.connections``, rounds alternated."""
    fit_req, echo_req = raw_request("/v1/fit", small_body()), raw_request("/echo", small_body())
    for payload in (fit_req, echo_req):  # warm both workers; check both answer 200
        for _ in range(20):
            _, answer = one_request(port, payload)
            assert answer.startswith(b"HTTP/1.1 200"), answer[:300]
    rounds = []
    for _ in range(args.rounds):  # alternate, so drift on the machine affects both alike
        rounds.append((load(port, echo_req, args.connections, args.seconds),
                       load(port, fit_req, args.connections, args.seconds)))
    print(f"workers: 2 sync  connections: {args.connections}  rounds: {args.rounds} x "
          f"{args.seconds:g} s each")
    for i, (echo, fit) in enumerate(rounds, 1):
        for name, r in (("echo", echo), ("/v1/fit n=50 sel 1..4 grid 200", fit)):
            print(f"  round {i} {name:30s} {r['rps']:7.0f} req/s  p50 {r['p50']:6.2f} ms  "
                  f"p99 {r['p99']:6.2f} ms  (n={r['n']}, errors={r['errors']})")
    ratios = [fit["rps"] / echo["rps"] for echo, fit in rounds]
    p99s = [fit["p99"] for _, fit in rounds]
    print(f"throughput ratio fit/echo: median {np.median(ratios):.2f} "
          f"(rounds: {', '.join(f'{r:.2f}' for r in ratios)})  target >= 0.45")
    print(f"/v1/fit p99 at {args.connections} connections: median {np.median(p99s):.2f} ms "
          f"(echo: {np.median([e['p99'] for e, _ in rounds]):.2f} ms)  target <= 5 ms")
    one = load(port, fit_req, 1, args.seconds)
    print(f"/v1/fit at 1 connection: {one['rps']:.0f} req/s  p50 {one['p50']:.2f} ms  "
          f"p99 {one['p99']:.2f} ms")
    service_times()


def service_times(repeats: int = 300) -> None:
    """The app's own time per request (in process, no sockets), fit vs echo, best of 5."""
    import logging

    logging.disable(logging.CRITICAL)
    client = bench_app().test_client()
    body = small_body()

    def per_request(path: str) -> float:
        best = float("inf")
        for _ in range(5):
            start = time.perf_counter()
            for _ in range(repeats):
                client.post(path, data=body, content_type="application/json")
            best = min(best, (time.perf_counter() - start) / repeats)
        return best * 1e3

    fit_ms, echo_ms = per_request("/v1/fit"), per_request("/echo")
    print(f"in-process time per request: /v1/fit {fit_ms:.2f} ms, echo {echo_ms:.2f} ms; "
          f"ratio of rates {echo_ms / fit_ms:.2f}")
    logging.disable(logging.NOTSET)


def run_big(port: int, args) -> None:
    """Part 2: a big /v1/fit against orjson decode+encode of the same payload, in pairs."""
    body = big_body(args.points)
    big_req = raw_request("/v1/fit", body)
    _, answer = one_request(port, big_req)  # warm-up, and check it works
    assert answer.startswith(b"HTTP/1.1 200"), answer[:300]
    pairs = []
    for _ in range(4):  # each fit timed right beside a codec run
        fit_s = one_request(port, big_req)[0]
        codec_s = best_of(lambda: orjson.dumps(orjson.loads(body)), 1)
        pairs.append((fit_s, codec_s))
    fit_s, codec_s = (float(np.median(v)) for v in zip(*pairs, strict=True))
    print(f"{args.points:,}-point /v1/fit over HTTP (degree 2, grid 200, no diagnostics): "
          f"median {fit_s * 1e3:.0f} ms; orjson decode+encode of the same "
          f"{len(body) / 1e6:.1f} MB payload: median {codec_s * 1e3:.0f} ms")
    print(f"ratio: {fit_s / codec_s:.2f} (pairs: "
          f"{', '.join(f'{f / c:.2f}' for f, c in pairs)})  target <= 2")
    import logging

    logging.disable(logging.CRITICAL)
    client = bench_app().test_client()
    inproc = []
    for _ in range(3):  # the same request without sockets (no 37 MB loopback transfer)
        inproc.append((best_of(lambda: client.post("/v1/fit", data=body,
                                                   content_type="application/json"), 1),
                       best_of(lambda: orjson.dumps(orjson.loads(body)), 1)))
    logging.disable(logging.NOTSET)
    fit_in, codec_in = (float(np.median(v)) for v in zip(*inproc, strict=True))
    print(f"in process (Flask test client): {fit_in * 1e3:.0f} ms vs codec {codec_in * 1e3:.0f} "
          f"ms; ratio {fit_in / codec_in:.2f}")


if __name__ == "__main__":
    sys.exit(main())
