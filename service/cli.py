"""Command line: ``curvewise serve [--host H] [--port P] [--workers N] [--dev]``.

Settings come from built-in defaults, then ``CURVEWISE_*`` environment
variables, then these flags (flags win). Production serving is gunicorn with
the settings in :mod:`service.runtime.gunicorn_conf`; ``--dev`` runs Flask's
single-process development server instead.
"""

from __future__ import annotations

import argparse
import logging
import os
import sys

from service.runtime import gunicorn_conf  # sets BLAS thread variables before numpy is imported


def build_parser() -> argparse.ArgumentParser:
    """The argument parser (exposed for tests and ``--help``)."""
    parser = argparse.ArgumentParser(prog="curvewise",
                                     description="Curvewise curve-fitting service.")
    commands = parser.add_subparsers(dest="command", required=True)
    serve = commands.add_parser("serve", help="run the HTTP service")
    serve.add_argument("--host", help="interface to bind (default 127.0.0.1, env CURVEWISE_HOST)")
    serve.add_argument("--port", type=int, help="TCP port (default 8000, env CURVEWISE_PORT)")
    serve.add_argument("--workers", type=int,
                       help="gunicorn worker processes (default: one per usable core, at least 2)")
    serve.add_argument("--dev", action="store_true",
                       help="Flask development server, debug on (never in production)")
    return parser


def main(argv: list[str] | None = None) -> int:
    """Entry point of the ``curvewise`` console script."""
    args = build_parser().parse_args(argv)
    host, port, workers = resolve(args)
    if args.dev:
        return _serve_dev(host, port)
    return _serve_gunicorn(host, port, workers)


def resolve(args: argparse.Namespace, environ: dict | None = None) -> tuple[str, int, int]:
    """Host, port and worker count: defaults, then CURVEWISE_* variables, then flags."""
    from service.config import Settings

    settings = Settings.load(environ=environ)
    host = args.host or settings.host
    port = args.port if args.port is not None else settings.port
    workers = args.workers or settings.workers or gunicorn_conf.default_workers()
    return host, port, workers


def announce(host: str, port: int, workers: int | None) -> str:
    """The lines a starting server prints: where it serves and what it does first."""
    from service.runtime.kernel_cache import startup_message

    who = "the development server" if workers is None else f"{workers} gunicorn workers"
    return (f"curvewise: serving http://{host}:{port}/ ({who}; API reference at /docs)\n"
            f"curvewise: {startup_message()}; until then every request gets 503 with "
            "Retry-After, and GET /readyz answers 200 once ready")


def say(text: str) -> None:
    """Tell the person starting the server what happens: plain lines on a terminal, one JSON
    log object per line otherwise (a container's log collector reads every line as JSON)."""
    if sys.stderr.isatty():
        print(text, file=sys.stderr, flush=True)
        return
    from service.runtime.logs import JsonFormatter

    formatter = JsonFormatter()
    for line in text.splitlines():
        record = logging.LogRecord("curvewise.serve", logging.INFO, __file__, 0, line, None, None)
        print(formatter.format(record), file=sys.stderr, flush=True)


def _serve_dev(host: str, port: int) -> int:
    from service.app import create_app
    from service.runtime import warming

    say(announce(host, port, None))
    app = create_app()
    warming.start(freeze=False)
    app.run(host=host, port=port, debug=True, use_reloader=False)
    return 0


def _serve_gunicorn(host: str, port: int, workers: int) -> int:
    from gunicorn.app.base import BaseApplication

    class _Server(BaseApplication):
        def load_config(self):
            for key in dir(gunicorn_conf):
                value = getattr(gunicorn_conf, key)
                if key in self.cfg.settings and value is not None:
                    self.cfg.set(key, value)
            self.cfg.set("bind", [f"{host}:{port}"])
            self.cfg.set("workers", workers)

        def load(self):
            from service.app import create_app

            return create_app()

    os.environ.setdefault("CURVEWISE_WORKERS", str(workers))
    say(announce(host, port, workers))
    _Server().run()
    return 0


if __name__ == "__main__":
    sys.exit(main())
