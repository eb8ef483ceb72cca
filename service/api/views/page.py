"""The service's own page at ``/`` and the API documentation at ``/docs``: static files, served offline.

- ``/`` is ``service/api/static/index.html``; its CSS and ES modules are under
  ``/assets/``. The page calls only the public ``/v1`` endpoints (with the
  caller's API key from the page's key field), so it is also a worked example
  of a web form using the service.
- ``/docs`` is Swagger UI from the ``swagger-ui-bundle-v2`` package (no CDN);
  it reads ``/v1/openapi.json``. The UI's files are public (they are the
  package's); the document and every call it tries go to ``/v1`` and need the
  key when keys are configured: the docs page sends the key kept by the page
  (see :mod:`service.api.security`).

Neither appears in the OpenAPI document: they are pages, not API operations.
"""

from __future__ import annotations

from pathlib import Path

from flask import Blueprint, Response, abort, send_from_directory

STATIC = Path(__file__).resolve().parent.parent / "static"

#: Swagger UI files the docs page loads (anything else under /docs is 404).
SWAGGER_FILES = frozenset({"swagger-ui.css", "swagger-ui-bundle.js", "swagger-ui-standalone-preset.js",
                           "favicon-32x32.png", "favicon-16x16.png"})

#: The pages load scripts and styles from this server only; the page's figures are blob: URLs.
CONTENT_SECURITY_POLICY = (
    "default-src 'self'; script-src 'self'; style-src 'self' 'unsafe-inline'; img-src 'self' data: blob:; "
    "connect-src 'self'; font-src 'self' data:; object-src 'none'; base-uri 'none'; frame-ancestors 'none'; "
    "form-action 'self'"
)

blp = Blueprint("page", __name__, static_folder=None)


def _swagger_dir() -> Path:
    from swagger_ui_bundle import swagger_ui_path

    return Path(str(swagger_ui_path))


def _page(response: Response, *, max_age: int = 0) -> Response:
    response.headers["Content-Security-Policy"] = CONTENT_SECURITY_POLICY
    response.headers["X-Content-Type-Options"] = "nosniff"
    response.headers["Referrer-Policy"] = "no-referrer"
    response.headers["Cache-Control"] = f"public, max-age={max_age}" if max_age else "no-cache"
    return response


@blp.get("/")
def index() -> Response:
    """The requirement form and the results (static HTML; the page's script calls /v1)."""
    return _page(send_from_directory(STATIC, "index.html", mimetype="text/html"))


@blp.get("/assets/<path:name>")
def static(name: str) -> Response:
    """The page's CSS and JavaScript modules."""
    return _page(send_from_directory(STATIC, name, max_age=300), max_age=300)


@blp.get("/docs")
def docs() -> Response:
    """Swagger UI reading /v1/openapi.json."""
    return _page(send_from_directory(STATIC, "docs.html", mimetype="text/html"))


@blp.get("/docs/<name>")
def docs_file(name: str) -> Response:
    """Swagger UI's own files, from the swagger-ui-bundle-v2 package."""
    if name == "LICENSE":
        return _page(Response(_swagger_license(), mimetype="text/plain"), max_age=3600)
    if name not in SWAGGER_FILES:
        abort(404)
    return _page(send_from_directory(_swagger_dir(), name, max_age=3600), max_age=3600)


def _swagger_license() -> str:
    from importlib.metadata import PackageNotFoundError, distribution

    try:
        dist = distribution("swagger-ui-bundle-v2")
    except PackageNotFoundError:  # pragma: no cover - a declared dependency
        abort(404)
    for f in dist.files or ():
        if f.name.upper().startswith("LICENSE"):
            return f.read_text(encoding="utf-8")
    return "Swagger UI is distributed under the Apache License 2.0 (swagger-ui-bundle-v2 package)."


def register(api) -> None:
    """Add the pages to the app behind the flask-smorest ``api`` (not to its OpenAPI document)."""
    api._app.register_blueprint(blp)
