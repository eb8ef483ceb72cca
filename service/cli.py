"""The ``rolloff`` command (also ``python -m service``).

``rolloff --version``
    Print the service version.
``rolloff serve [--host H] [--port P] [--workers N]``
    Run the service under gunicorn with the project's configuration
    (``service/gunicorn_conf.py``), the app preloaded in the master. An invalid
    ``ROLLOFF_*`` setting stops it before anything starts: one line on stderr
    naming the variable, its value and what is allowed, exit status 2.
``rolloff openapi --write | --check``
    Regenerate, or verify, the committed OpenAPI document.
"""

from __future__ import annotations

import argparse
import os
import sys
import tempfile

from service.config import _port, _positive_int, load_or_exit
from service.version import SERVICE_VERSION


def _serve(args: argparse.Namespace) -> int:
    # Validate here for a prompt exit 2; the gunicorn master validates again and warns about
    # unknown ROLLOFF_* variables once, when it reads service/gunicorn_conf.py.
    settings = load_or_exit(warn=False)
    env = dict(os.environ)
    env["ROLLOFF_HOST"] = args.host or settings.host
    env["ROLLOFF_PORT"] = str(args.port or settings.port)
    env["ROLLOFF_WORKERS"] = str(args.workers or settings.workers)
    # One BLAS thread per worker: the workers are the parallelism, and small matrix calls
    # under an oversubscribed BLAS thread pool were measured 3-40x slower on 2 cores.
    env.setdefault("OPENBLAS_NUM_THREADS", "1")
    env.setdefault("OMP_NUM_THREADS", "1")
    if not env.get("PROMETHEUS_MULTIPROC_DIR"):
        env["PROMETHEUS_MULTIPROC_DIR"] = tempfile.mkdtemp(prefix="rolloff-metrics-")
    argv = [sys.executable, "-m", "gunicorn", "--config", "python:service.gunicorn_conf", "service.wsgi:app"]
    os.execvpe(argv[0], argv, env)
    return 0  # not reached


def _option(parse):
    """An argparse type from a settings parser: a refused value is a usage error naming what is allowed."""

    def convert(text: str):
        try:
            return parse(text)
        except ValueError:
            raise argparse.ArgumentTypeError(f"{text!r} is not valid: expected {parse.allowed}") from None

    return convert


def _openapi(args: argparse.Namespace) -> int:
    from service.api import openapi

    if args.write:
        path = openapi.write()
        print(f"wrote {path}")
        return 0
    if openapi.is_current():
        print("openapi/openapi.json is current")
        return 0
    print("openapi/openapi.json is stale: run `rolloff openapi --write` and commit it", file=sys.stderr)
    return 1


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(prog="rolloff", description="Analog filter design service.")
    parser.add_argument("--version", action="version", version=f"rolloff {SERVICE_VERSION}")
    sub = parser.add_subparsers(dest="command", required=True)
    serve = sub.add_parser("serve", help="run the HTTP service under gunicorn")
    serve.add_argument("--host", help="bind address (default ROLLOFF_HOST or 127.0.0.1)")
    serve.add_argument("--port", type=_option(_port), help="port (default ROLLOFF_PORT or 8000)")
    serve.add_argument("--workers", type=_option(_positive_int),
                       help="worker processes (default ROLLOFF_WORKERS or 2)")
    serve.set_defaults(func=_serve)
    spec = sub.add_parser("openapi", help="write or check openapi/openapi.json")
    group = spec.add_mutually_exclusive_group(required=True)
    group.add_argument("--write", action="store_true", help="regenerate the committed document")
    group.add_argument("--check", action="store_true", help="exit 1 when the committed document is stale")
    spec.set_defaults(func=_openapi)
    args = parser.parse_args(argv)
    return args.func(args)


if __name__ == "__main__":
    raise SystemExit(main())
