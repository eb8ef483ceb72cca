"""RFC 9457 problem details: the one place errors become HTTP responses.

Every 4xx and 5xx the service sends is ``application/problem+json`` with
``type``, ``title``, ``status``, ``detail``, ``instance`` and ``request_id``;
validation problems add ``errors``, a mapping of field path to messages.
Computation-layer exceptions are mapped to statuses by :data:`STATUS_OF`
(most specific class first): a computation stopped by its request deadline
(:class:`service.deadline.DeadlineExceeded`) is a 503 with ``Retry-After``,
whose abandoned arrays are released before the answer goes out. No
traceback ever reaches a client: an unexpected exception is logged with its
traceback and answered with a generic 500 carrying the request id.

References
----------
.. [1] RFC 9457, "Problem Details for HTTP APIs", 2023.
"""

from __future__ import annotations

import ctypes
import logging
import math
import traceback
from typing import Any, Mapping

from flask import Response, g, json, request
from werkzeug.exceptions import HTTPException

from service.deadline import DeadlineExceeded
from service.errors import InfeasibleSpec, InvalidParameter, LimitExceeded, RolloffError

PROBLEM_MEDIA_TYPE = "application/problem+json"
_TYPE_BASE = "urn:rolloff:problem:"

log = logging.getLogger("rolloff.errors")

#: Computation exception -> (status, problem slug, title). First match wins.
STATUS_OF: tuple[tuple[type[BaseException], int, str, str], ...] = (
    (DeadlineExceeded, 503, "deadline-exceeded", "Computation stopped at its time limit"),
    (LimitExceeded, 422, "limit-exceeded", "Request exceeds a configured limit"),
    (InfeasibleSpec, 422, "infeasible-requirement", "Requirement cannot be met"),
    (InvalidParameter, 422, "invalid-parameter", "Invalid parameter"),
    (RolloffError, 422, "invalid-request", "Request cannot be computed"),
)


class ProblemException(HTTPException):
    """An HTTP error raised by the api layer with problem fields attached.

    Parameters
    ----------
    status : int
    detail : str
    slug : str
        Short problem type name; the ``type`` member becomes ``urn:rolloff:problem:<slug>``.
    errors : mapping, optional
        Field path -> list of messages.
    extra : mapping, optional
        Further members of the problem object.
    headers : mapping, optional
    """

    def __init__(self, status: int, detail: str, *, slug: str | None = None, title: str | None = None,
                 errors: Mapping[str, list[str]] | None = None, extra: Mapping[str, Any] | None = None,
                 headers: Mapping[str, str] | None = None):
        super().__init__(description=detail)
        self.code = status
        self.slug = slug
        self.title = title
        self.errors = dict(errors) if errors else None
        self.extra = dict(extra) if extra else {}
        self.extra_headers = dict(headers) if headers else {}


def problem_response(status: int, *, title: str, detail: str, slug: str | None = None,
                     errors: Mapping[str, list[str]] | None = None, extra: Mapping[str, Any] | None = None,
                     headers: Mapping[str, str] | None = None) -> Response:
    """Build the ``application/problem+json`` response."""
    body: dict[str, Any] = {
        "type": f"{_TYPE_BASE}{slug}" if slug else "about:blank",
        "title": title,
        "status": status,
        "detail": detail,
        "instance": request.path if request else None,
        "request_id": getattr(g, "request_id", None),
    }
    if errors:
        body["errors"] = errors
    if extra:
        body.update(extra)
    resp = Response(json.dumps(body), status=status, mimetype=PROBLEM_MEDIA_TYPE)
    for k, v in (headers or {}).items():
        resp.headers[k] = v
    return resp


def flatten_messages(messages: Any, prefix: str = "") -> dict[str, list[str]]:
    """marshmallow's nested error dict -> ``{"a.b[2].c": ["message", ...]}``.

    webargs wraps messages by location (``{"json": {...}}``, ``{"query": {...}}``);
    the location is dropped for bodies and kept as ``query.`` for query strings.
    """
    out: dict[str, list[str]] = {}

    def walk(node: Any, path: str) -> None:
        if isinstance(node, Mapping):
            for key, value in node.items():
                if isinstance(key, int):
                    sub = f"{path}[{key}]"
                elif key == "_schema":
                    sub = path
                else:
                    sub = f"{path}.{key}" if path else str(key)
                walk(value, sub)
        elif isinstance(node, (list, tuple)):
            if all(isinstance(m, str) for m in node):
                out.setdefault(path or "body", []).extend(node)
            else:
                for item in node:
                    walk(item, path)
        else:
            out.setdefault(path or "body", []).append(str(node))

    walk(messages, prefix)
    return out


def _unwrap_locations(messages: Any) -> Any:
    if isinstance(messages, Mapping) and set(messages) <= {"json", "query", "form", "headers", "files"}:
        merged: dict[str, Any] = {}
        for loc, inner in messages.items():
            if loc == "json":
                merged.update(inner if isinstance(inner, Mapping) else {"body": inner})
            else:
                merged.update({f"{loc}.{k}" if loc != "query" else k: v for k, v in
                               (inner.items() if isinstance(inner, Mapping) else [("body", inner)])})
        return merged
    return messages


def handle_http_exception(error: HTTPException) -> Response:
    """Flask/werkzeug/webargs HTTP errors -> problem+json (keeps headers such as ``Allow``)."""
    headers = dict(error.get_headers()) if hasattr(error, "get_headers") else {}
    headers.pop("Content-Type", None)
    status = error.code or 500
    title = error.name
    if isinstance(error, ProblemException):
        headers.update(error.extra_headers)
        return problem_response(status, title=error.title or title, detail=error.description,
                                slug=error.slug, errors=error.errors, extra=error.extra, headers=headers)
    data = getattr(error, "data", None) or {}
    errors = None
    detail = error.description or title
    if "messages" in data:
        errors = flatten_messages(_unwrap_locations(data["messages"]))
        fields_ = ", ".join(sorted(errors))
        detail = f"The request has invalid fields: {fields_}." if fields_ else "The request is invalid."
        return problem_response(status, title="Validation failed", detail=detail, slug="validation",
                                errors=errors, headers=headers | dict(data.get("headers") or {}))
    if status == 413:
        from flask import current_app

        limit = current_app.config.get("MAX_CONTENT_LENGTH")
        return problem_response(
            413, title=title, slug="body-too-large", headers=headers,
            detail=f"The request body exceeds the limit of {limit} bytes (set by ROLLOFF_MAX_BODY_BYTES).",
            extra={"limit": "max_body_bytes", "limit_value": limit, "setting": "ROLLOFF_MAX_BODY_BYTES"})
    if status == 405:
        detail = f"{request.method} is not allowed here; allowed: {headers.get('Allow', '')}."
    elif status == 404:
        detail = f"No resource at {request.path}."
    return problem_response(status, title=title, detail=detail, headers=headers)


def retry_after_s() -> int:
    """Seconds a client is asked to wait before retrying a 503 (the request deadline, rounded up)."""
    from flask import current_app

    settings = current_app.config.get("ROLLOFF_SETTINGS")
    return max(1, math.ceil(getattr(settings, "request_deadline_s", 10)))


def _release_abandoned(error: BaseException) -> None:
    """Free what a stopped computation held: its frames' locals, then unused heap back to the system."""
    traceback.clear_frames(error.__traceback__)
    try:
        ctypes.CDLL(None).malloc_trim(0)
    except (AttributeError, OSError):  # not glibc
        pass


def handle_rolloff_error(error: RolloffError) -> Response:
    """A computation-layer exception -> 4xx problem naming the field and the reason (503 for a deadline)."""
    for cls, status, slug, title in STATUS_OF:
        if isinstance(error, cls):
            break
    if isinstance(error, DeadlineExceeded):
        log.warning("request %s %s stopped by its deadline in %s (request_id=%s)", request.method, request.path,
                    error.where, getattr(g, "request_id", None))
        _release_abandoned(error)
        seconds = retry_after_s()
        return problem_response(
            status, title=title, slug=slug, headers={"Retry-After": str(seconds)},
            detail=(f"The computation did not finish within the request time limit of {error.seconds:g} s "
                    "(ROLLOFF_REQUEST_DEADLINE_S). Retry later, or ask for less work (fewer trials, points "
                    "or stages)."),
            extra={"limit": "request_deadline_s", "limit_value": error.seconds,
                   "setting": "ROLLOFF_REQUEST_DEADLINE_S"})
    errors = {error.field: [error.message]} if error.field else None
    extra: dict[str, Any] = {}
    if isinstance(error, LimitExceeded):
        extra = {"limit": error.limit, "limit_value": error.value, "setting": error.setting}
    extra.update(getattr(error, "details", None) or {})
    return problem_response(status, title=title, detail=error.message, slug=slug, errors=errors, extra=extra)


def handle_unexpected(error: Exception) -> Response:
    """Anything else: log the traceback server-side, answer a generic 500."""
    if isinstance(error, HTTPException):
        return handle_http_exception(error)
    log.exception("unhandled error on %s %s (request_id=%s)", request.method, request.path,
                  getattr(g, "request_id", None))
    return problem_response(
        500, title="Internal Server Error", slug="internal",
        detail=("The service failed to answer this request. The error has been logged; "
                f"quote request id {getattr(g, 'request_id', '?')} when reporting it."),
    )
