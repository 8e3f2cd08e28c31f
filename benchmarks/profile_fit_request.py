"""Where one /v1/fit request's time goes, in-process, through the whole WSGI app.

The request is bench_fit_overhead's (n = 50 seeded points, degree 1..4 by sequential F,
200-point grid, every section). The app is called directly as WSGI (guard middleware,
Flask, every hook, the access log written to /dev/null, Prometheus in multiprocess mode as
under gunicorn), thousands of times after a warm-up and ``gc.freeze`` (as a worker does),
best of five rounds. Printed, in microseconds per request:

1. the whole request, and the bare echo app (bench_fit_overhead's) for comparison;
2. the request's parts, timed *inside* real requests (a wrapper around each named function):
   parts run slower inside a request than alone in a loop (their code and data share the
   caches with everything else the request runs), so these are the figures to reason with;
3. the hooks and middleware: the app with its view answering a constant body (the same
   bytes), then with one group of hooks removed at a time; last, the real request with no
   hook and no guard (its difference from the whole request is what they cost in it).

Not a gunicorn measurement: a worker adds its own HTTP parsing, socket work and access to
the request (bench_fit_overhead.py measures that, as CPU time per request). Nothing is
asserted.

``--baseline CHECKOUT`` instead compares the whole request of this checkout and of another
(say the commit before a change, exported with ``git archive``): each measured in its own
fresh interpreter with that checkout first on ``sys.path``, alternately, ``--rounds`` times;
printed are the best wall and CPU (process) time per request of each and their ratio.
Small changes need this: on a shared machine a single run swings by more than they move.

Run: ``.venv/bin/python benchmarks/profile_fit_request.py [--requests 3000]
[--baseline /tmp/base --rounds 6]``.
"""

from __future__ import annotations

import argparse
import collections
import gc
import io
import logging
import os
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
# --baseline runs this file with another checkout to be measured (it must come first)
CHECKOUT = os.environ.get("CURVEWISE_PROFILE_CHECKOUT", str(ROOT))
if sys.path[:1] != [CHECKOUT]:
    sys.path.insert(0, CHECKOUT)
os.environ.setdefault("PROMETHEUS_MULTIPROC_DIR", tempfile.mkdtemp(prefix="curvewise-prof-"))

# (module, attribute path, label): timed inside real requests; indented labels are inside
# others. A dotted path wraps an attribute of an object of the module (``fit.loader``: the
# loader the view's fast-body wrapper looks up per request; ``orjson.loads``: the module's
# orjson, i.e. the body's decode, the only orjson.loads of such a request).
PARTS = (
    ("service.api.parsing", "json_text", "body read"),
    ("service.api.parsing", "orjson.loads", "body decode (orjson)"),
    ("service.api.fits", "fit.loader", "fast body loader"),
    ("service.api.fits", "check_series", "series limits"),
    ("service.api.fits", "model_spec", "model spec"),
    ("service.api.fits", "fit_options", "fit options"),
    ("service.api.fits", "fit_series", "fit_series (core)"),
    ("service.core.polynomial.fit", "check_spec", "  spec checks"),
    ("service.core.polynomial.fit", "clean_data", "  clean_data"),
    ("service.core.polynomial.fit", "_select", "  QR + candidates + selection"),
    ("service.core.polynomial.fit", "_float64_readout", "  raw coefficients (float64)"),
    ("service.core.polynomial.fit", "fit_tables", "  coefficient + ANOVA tables"),
    ("service.core.polynomial.fit", "diagnose", "  diagnostics"),
    ("service.core.polynomial.fit", "grid_points", "  grid points"),
    ("service.core.polynomial.fit", "grid_prediction", "  grid bands"),
    ("service.core.polynomial.fit", "trust_flags", "  trust flags"),
    ("service.api.fits", "fit_response", "response dict"),
    ("service.core.models.document", "checksum", "  document checksum"),
    ("service.http.reporting", "plain", "  rows as dicts (all calls)"),
    ("service.http.reporting", "plain_rows", "  row tables as dicts"),
    ("service.http.jsonio", "OrjsonProvider.response", "json.response (encode + Response)"),
    ("service.http.jsonio", "dumps_bytes", "  orjson of the response"),
)


def request_runner(app, path: str, body: bytes):
    """A function running one POST through ``app`` as WSGI (body read and closed)."""
    from werkzeug.test import EnvironBuilder

    base = EnvironBuilder(path=path, method="POST", data=body,
                          content_type="application/json").get_environ()
    base["SERVER_SOFTWARE"] = "gunicorn"  # the deadline guard behaves as under gunicorn

    def start_response(status, headers, exc_info=None):
        if not status.startswith("200"):
            raise SystemExit(f"{path} answered {status}")

    def one() -> bytes:
        environ = dict(base)
        environ["wsgi.input"] = io.BytesIO(body)
        answer = app(environ, start_response)
        try:
            return b"".join(answer)
        finally:
            getattr(answer, "close", lambda: None)()

    return one


def best_microseconds(function, count: int, rounds: int = 5) -> float:
    for _ in range(min(count, 300)):
        function()
    best = float("inf")
    for _ in range(rounds):
        start = time.perf_counter()
        for _ in range(count):
            function()
        best = min(best, (time.perf_counter() - start) / count * 1e6)
    return best


def quiet_app():
    from service.app import create_app

    app = create_app()
    for handler in logging.getLogger("curvewise").handlers:  # formatted and written, unseen
        handler.stream = open(os.devnull, "w")  # noqa: SIM115 - lives as long as the app
    return app


def timed_parts(app, body: bytes, count: int) -> dict[str, float]:
    """Microseconds per request in each of PARTS, measured inside real requests."""
    spent: collections.Counter = collections.Counter()
    originals = []
    for module_name, path, label in PARTS:
        *owners, name = path.split(".")
        module = sys.modules[module_name]
        for owner in owners:
            module = getattr(module, owner)
        original = getattr(module, name)
        originals.append((module, name, original))

        def wrapper(*args, _original=original, _label=label, **kwargs):
            start = time.perf_counter()
            try:
                return _original(*args, **kwargs)
            finally:
                spent[_label] += time.perf_counter() - start

        setattr(module, name, wrapper)
    one = request_runner(app, "/v1/fit", body)
    try:
        for _ in range(300):
            one()
        spent.clear()
        for _ in range(count):
            one()
    finally:
        for module, name, original in originals:
            setattr(module, name, original)
    return {label: spent[label] / count * 1e6 for _, _, label in PARTS}


def hook_costs(body: bytes, answer: bytes, count: int) -> dict[str, float]:
    """The app with a constant view, whole and with one group of hooks removed at a time; and
    the real request without any hook or the guard (what they cost there, where they run
    with caches that the fit itself has just used: more than beside a constant view)."""
    from flask import Response

    def variant(before=(), after=(), guard=True, constant=True):
        app = quiet_app()
        if constant:
            app.view_functions["fits.fit"] = lambda *a, **k: Response(
                answer, mimetype="application/json")
        hooks = app.before_request_funcs[None]
        hooks[:] = [f for f in hooks if f.__name__ not in before]
        hooks = app.after_request_funcs[None]
        hooks[:] = [f for f in hooks if f.__name__ not in after]
        if not guard:
            app.wsgi_app = app.wsgi_app.wsgi_app  # under the DeadlineMiddleware
        return best_microseconds(request_runner(app, "/v1/fit", body), count)

    every = dict(before=("_start", "_access", "_body_size", "_warming_up"),
                 after=("_finish", "_headers", "_mark_produced"), guard=False)
    return {
        "constant view, every hook and the guard": variant(),
        "  without request id/metrics/access log": variant(("_start",), ("_finish",)),
        "  without auth/CORS/security headers": variant(("_access",), ("_headers",)),
        "  without the deadline guard middleware": variant(guard=False),
        "  without body-size/produced marks": variant(("_body_size",), ("_mark_produced",)),
        "constant view, no hook, no guard": variant(**every),
        "real /v1/fit view, no hook, no guard": variant(**every, constant=False),
    }


def whole_request(count: int, rounds: int = 5) -> tuple[float, float]:
    """Best wall and CPU microseconds per request of this interpreter's checkout."""
    from benchmarks.bench_fit_overhead import request_body

    one = request_runner(quiet_app(), "/v1/fit", request_body())
    for _ in range(min(count, 500)):
        one()
    gc.collect()
    gc.freeze()
    wall = cpu = float("inf")
    for _ in range(rounds):
        started, cpu_started = time.perf_counter(), time.process_time()
        for _ in range(count):
            one()
        wall = min(wall, (time.perf_counter() - started) / count * 1e6)
        cpu = min(cpu, (time.process_time() - cpu_started) / count * 1e6)
    return wall, cpu


def compare(baseline: Path, count: int, rounds: int) -> int:
    """The whole request of this checkout and of ``baseline``, alternately, in fresh
    interpreters (each checkout first on sys.path): best wall and CPU of each."""
    import subprocess

    roots = {"this checkout": ROOT, "baseline": baseline.resolve()}
    best = {name: [float("inf"), float("inf")] for name in roots}
    for _ in range(rounds):
        for name, root in roots.items():
            out = subprocess.run(
                [sys.executable, str(Path(__file__).resolve()), "--whole", str(count)],
                cwd=root, env={**os.environ, "CURVEWISE_PROFILE_CHECKOUT": str(root)}, check=True,
                capture_output=True, text=True).stdout.split()
            best[name] = [min(b, float(v)) for b, v in zip(best[name], out, strict=True)]
    print(f"whole /v1/fit request in-process, best of {rounds} alternated runs x 5 rounds "
          f"of {count} requests (us per request):")
    for name, (wall, cpu) in best.items():
        print(f"  {name:14s} wall {wall:7.1f}  CPU {cpu:7.1f}  ({roots[name]})")
    (wall, cpu), (base_wall, base_cpu) = best.values()
    print(f"this checkout / baseline: wall {wall / base_wall:.3f}, CPU {cpu / base_cpu:.3f}")
    return 0


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--requests", type=int, default=3000, help="requests per round")
    parser.add_argument("--baseline", type=Path, metavar="CHECKOUT",
                        help="compare the whole request with another checkout, alternately")
    parser.add_argument("--rounds", type=int, default=6, help="alternations for --baseline")
    parser.add_argument("--whole", type=int, metavar="N", help=argparse.SUPPRESS)
    args = parser.parse_args(argv)
    if args.whole:  # one side of --baseline, in this interpreter's checkout
        print(*(f"{v:.2f}" for v in whole_request(args.whole)))
        return 0
    if args.baseline is not None:
        return compare(args.baseline, min(args.requests, 1000), args.rounds)
    from benchmarks.bench_fit_overhead import echo_app, request_body

    body = request_body()
    app = quiet_app()
    one = request_runner(app, "/v1/fit", body)
    answer = one()
    gc.collect()
    gc.freeze()  # as a gunicorn worker does after its warm-up
    whole = best_microseconds(one, args.requests)
    echo = best_microseconds(request_runner(echo_app(), "/echo", body), args.requests)
    print(f"in-process, best of 5 rounds of {args.requests} requests (us per request); "
          f"answer {len(answer):,} bytes")
    print(f"  /v1/fit, the whole request            {whole:7.1f}")
    print(f"  bare Flask+orjson echo app            {echo:7.1f}")
    print("inside real requests (wrapped functions; each wrapper adds ~0.2 us a call):")
    parts = timed_parts(app, body, args.requests)
    for label, value in parts.items():
        print(f"  {label:36s} {value:7.1f}")
    top = sum(v for k, v in parts.items() if not k.startswith(" "))
    print(f"  {'rest (Flask, hooks, guard, view glue)':36s} {whole - top:7.1f}")
    print("hooks and middleware (view answering the same bytes, constant; last, the real view):")
    for label, value in hook_costs(body, answer, args.requests).items():
        print(f"  {label:40s} {value:7.1f}")
    print(f"  (the whole request above, every hook and the guard: {whole:.1f})")
    return 0


if __name__ == "__main__":
    sys.exit(main())
