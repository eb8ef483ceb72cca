"""CORS for the internal web forms: an exact allowlist of origins (``ROLLOFF_CORS_ORIGINS``).

None by default: then no response carries a CORS header. With origins set,
a ``/v1`` request whose ``Origin`` is on the list gets
``Access-Control-Allow-Origin: <that origin>`` and
``Access-Control-Expose-Headers: X-Request-ID, X-Rolloff-Version``; a
preflight (``OPTIONS`` with ``Access-Control-Request-Method`` GET or POST)
from such an origin is answered 204 with the allowed methods (GET, POST) and
request headers (Content-Type, Authorization, X-Request-ID), without an API
key. Requests from any other origin, or for paths outside ``/v1``, get no
CORS header at all (the browser then refuses them). Every ``/v1`` response
carries ``Vary: Origin`` while origins are configured, so caches keep the
answers to different origins apart. No credentials mode: keys travel in the
``Authorization`` header, never in cookies.

Written here rather than with flask-cors (≈60 lines): origins are matched as
exact strings only (flask-cors reads origin strings that look like regular
expressions as patterns), the preflight must be answered before the API-key
check, and it is one runtime dependency fewer in the image.

References
----------
.. [1] WHATWG Fetch Standard, section 3.2 "CORS protocol".
"""

from __future__ import annotations

from urllib.parse import urlsplit

from flask import Flask, Response, request

from service.config import Settings

PREFIX = "/v1"
ALLOWED_METHODS = ("GET", "POST")
ALLOWED_HEADERS = ("Content-Type", "Authorization", "X-Request-ID")
EXPOSED_HEADERS = ("X-Request-ID", "X-Rolloff-Version")
MAX_AGE_S = 600


def normalize_origin(origin: str) -> str:
    """``"HTTPS://Forms.Example:8443/"`` -> ``"https://forms.example:8443"``.

    Raises
    ------
    ValueError
        When ``origin`` is not ``scheme://host[:port]`` with scheme http or https
        (the message names ``ROLLOFF_CORS_ORIGINS``).
    """
    text = origin.strip().rstrip("/")
    parts = urlsplit(text)
    if parts.scheme.lower() not in ("http", "https") or not parts.hostname or parts.path or parts.query \
            or parts.fragment or parts.username or parts.password:
        raise ValueError(f"ROLLOFF_CORS_ORIGINS: {origin!r} is not an origin of the form "
                         "https://host[:port] (no path, no wildcard)")
    return text.lower()


def _in_scope(path: str) -> bool:
    return path == PREFIX or path.startswith(PREFIX + "/")


def install(app: Flask, settings: Settings) -> frozenset[str]:
    """Register the CORS hooks on ``app`` (nothing is registered when no origin is configured).

    Parameters
    ----------
    app : flask.Flask
    settings : service.config.Settings
        ``cors_origins`` is used.

    Returns
    -------
    frozenset of str
        The normalized allowed origins.
    """
    allowed = frozenset(normalize_origin(o) for o in settings.cors_origins)
    app.extensions["rolloff_cors_origins"] = allowed
    if not allowed:
        return allowed

    def _allowed_origin() -> str | None:
        origin = request.headers.get("Origin")
        if origin and _in_scope(request.path) and origin.lower().rstrip("/") in allowed:
            return origin
        return None

    @app.before_request
    def _preflight():
        if request.method != "OPTIONS":
            return None
        wanted = request.headers.get("Access-Control-Request-Method", "").upper()
        origin = _allowed_origin()
        if origin is None or wanted not in ALLOWED_METHODS:
            return None  # an ordinary OPTIONS answer, without CORS headers
        resp = Response(status=204)
        del resp.headers["Content-Type"]
        resp.headers["Access-Control-Allow-Origin"] = origin
        resp.headers["Access-Control-Allow-Methods"] = ", ".join(ALLOWED_METHODS)
        resp.headers["Access-Control-Allow-Headers"] = ", ".join(ALLOWED_HEADERS)
        resp.headers["Access-Control-Max-Age"] = str(MAX_AGE_S)
        return resp

    @app.after_request
    def _cors_headers(response: Response) -> Response:
        if not _in_scope(request.path):
            return response
        response.vary.add("Origin")
        if request.method == "OPTIONS" and "Access-Control-Request-Method" in request.headers:
            return response  # a preflight: answered (or refused) by _preflight alone
        origin = _allowed_origin()
        if origin is not None and "Access-Control-Allow-Origin" not in response.headers:
            response.headers["Access-Control-Allow-Origin"] = origin
            response.headers["Access-Control-Expose-Headers"] = ", ".join(EXPOSED_HEADERS)
        return response

    return allowed
