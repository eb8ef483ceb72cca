"""The ``rolloff`` command (also ``python -m service``).

``rolloff serve [--host H] [--port P] [--workers N]``
    Run the service under gunicorn with the project's configuration
    (``service/gunicorn_conf.py``), the app preloaded in the master.
``rolloff openapi --write | --check``
    Regenerate, or verify, the committed OpenAPI document.
"""

from __future__ import annotations

import argparse
import os
import sys
import tempfile

from service.config import Settings


def _serve(args: argparse.Namespace) -> int:
    settings = Settings.from_env()
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
    sub = parser.add_subparsers(dest="command", required=True)
    serve = sub.add_parser("serve", help="run the HTTP service under gunicorn")
    serve.add_argument("--host", help="bind address (default ROLLOFF_HOST or 127.0.0.1)")
    serve.add_argument("--port", type=int, help="port (default ROLLOFF_PORT or 8000)")
    serve.add_argument("--workers", type=int, help="worker processes (default ROLLOFF_WORKERS or 2)")
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
