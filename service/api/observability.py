"""Request ids and one JSON log line per request, on stderr.

A caller's ``X-Request-ID`` (1-128 characters of ``A-Z a-z 0-9 . _ : -``) is
kept; otherwise one is made. It is echoed in the response header, put in
every problem body and in the log line ``{"method", "path", "status",
"duration_ms", "request_id"}``. API keys and bodies are never logged.
"""

from __future__ import annotations

import json
import logging
import re
import sys
import time
import uuid

from flask import Flask, g, request

_ID_RE = re.compile(r"^[A-Za-z0-9._:\-]{1,128}$")

access_log = logging.getLogger("rolloff.access")


class JsonLineFormatter(logging.Formatter):
    """Each record as one JSON object; ``record.fields`` (a dict) is merged in."""

    def format(self, record: logging.LogRecord) -> str:
        entry = {"time": self.formatTime(record, "%Y-%m-%dT%H:%M:%S"), "level": record.levelname.lower(),
                 "logger": record.name}
        fields = getattr(record, "fields", None)
        if fields:
            entry.update(fields)
        else:
            entry["message"] = record.getMessage()
        if record.exc_info:
            entry["traceback"] = self.formatException(record.exc_info)
        return json.dumps(entry)


class _StderrHandler(logging.StreamHandler):
    """Writes to whatever ``sys.stderr`` is at the time of each record."""

    def __init__(self):
        super().__init__(sys.stderr)

    @property
    def stream(self):
        return sys.stderr

    @stream.setter
    def stream(self, value):
        pass


def configure_logging(level: str) -> None:
    """Send the ``rolloff`` loggers to stderr as JSON lines (idempotent)."""
    root = logging.getLogger("rolloff")
    root.setLevel(level.upper())
    if not any(getattr(h, "_rolloff", False) for h in root.handlers):
        handler = _StderrHandler()
        handler.setFormatter(JsonLineFormatter())
        handler._rolloff = True  # type: ignore[attr-defined]
        root.addHandler(handler)
    root.propagate = False


def install(app: Flask, *, version: str) -> None:
    """Register the request-id, timing, version-header and access-log hooks."""

    @app.before_request
    def _start() -> None:
        given = request.headers.get("X-Request-ID", "")
        g.request_id = given if _ID_RE.match(given) else uuid.uuid4().hex
        g.started = time.perf_counter()

    @app.after_request
    def _finish(response):
        response.headers["X-Request-ID"] = getattr(g, "request_id", "")
        response.headers["X-Rolloff-Version"] = version
        started = getattr(g, "started", None)
        duration_ms = round((time.perf_counter() - started) * 1000, 3) if started else None
        access_log.info("request", extra={"fields": {
            "method": request.method, "path": request.path, "status": response.status_code,
            "duration_ms": duration_ms, "request_id": getattr(g, "request_id", None)}})
        return response
