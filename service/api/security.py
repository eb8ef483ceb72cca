"""API keys: ``Authorization: Bearer <key>`` on every ``/v1`` call, when keys are configured.

Off by default (a local run needs no key). With ``ROLLOFF_API_KEYS`` (comma
separated) or ``ROLLOFF_API_KEYS_FILE`` (one key per line, blank lines and
``#`` comments ignored) set, a ``/v1`` request without a bearer token gets 401
with ``WWW-Authenticate: Bearer realm="rolloff"``, and one with an unknown
token gets 401 with ``error="invalid_token"`` (RFC 6750, section 3).
``/healthz``, ``/readyz`` and ``/metrics`` stay open, and CORS preflight
requests (``OPTIONS``) are answered without a key.

The page at ``/`` and the API documentation at ``/docs`` are static files
(the page's own, and Swagger UI's from its package): a browser loads them
without a key, since it cannot send a header when it opens a URL. Everything
they show about the API comes from ``/v1`` -- the OpenAPI document at
``/v1/openapi.json`` included -- so it is behind the same rule: both pages
send the key the user typed (kept in the tab's ``sessionStorage`` only) as
``Authorization: Bearer``, and without it they show the 401.

Keys are compared in constant time: the SHA-256 digest of the presented token
is compared with :func:`hmac.compare_digest` against the digest of *every*
configured key (no early exit, and no length leak since digests have one
length). Keys are never logged and never echoed in a response.

Rotation: the keys file is read at app start and read again whenever its
modification time (or size) changes, checked with one ``stat`` per ``/v1``
request, so replacing the file rotates keys without a restart. If the file
becomes unreadable or empty after start, the last good keys stay in force and
a warning is logged (fail closed: the service never falls back to "no keys").

References
----------
.. [1] RFC 6750, "The OAuth 2.0 Authorization Framework: Bearer Token Usage", 2012, sections 2.1 and 3.
.. [2] RFC 9110, "HTTP Semantics", 2022, section 11.6.1 (WWW-Authenticate).
"""

from __future__ import annotations

import hashlib
import hmac
import logging
import os
import threading
from typing import Iterable

from apispec import BasePlugin
from flask import Flask, request

from service.api.problems import ProblemException
from service.config import Settings

log = logging.getLogger("rolloff.security")

#: Paths under this prefix need a key when keys are configured.
PROTECTED_PREFIX = "/v1"
REALM = "rolloff"
SCHEME_NAME = "bearerAuth"


def _digest(key: str) -> bytes:
    return hashlib.sha256(key.encode("utf-8")).digest()


def parse_keys_file(text: str) -> tuple[str, ...]:
    """Keys of a keys file: one per line; blank lines and ``#`` comments ignored.

    Parameters
    ----------
    text : str
        The file's content.

    Returns
    -------
    tuple of str
        The keys, stripped of surrounding white space, in file order.
    """
    keys = []
    for line in text.splitlines():
        line = line.split("#", 1)[0].strip()
        if line:
            keys.append(line)
    return tuple(keys)


class KeyStore:
    """The configured API keys, held as SHA-256 digests.

    Parameters
    ----------
    keys : iterable of str
        Keys given directly (``ROLLOFF_API_KEYS``).
    keys_file : str
        Path of a keys file (``ROLLOFF_API_KEYS_FILE``), or ``""`` for none.

    Raises
    ------
    ValueError
        When the keys file cannot be read or holds no key (the message names
        ``ROLLOFF_API_KEYS_FILE``), or when a key contains white space.
    """

    def __init__(self, keys: Iterable[str] = (), keys_file: str = ""):
        self._direct = tuple(_digest(k) for k in self._checked(keys, "ROLLOFF_API_KEYS"))
        self._file = keys_file
        self._file_digests: tuple[bytes, ...] = ()
        self._stamp: tuple[int, int] | None = None
        self._lock = threading.Lock()
        if keys_file:
            stamp, keys_read = self._read_file()
            if not keys_read:
                raise ValueError(f"ROLLOFF_API_KEYS_FILE: {keys_file!r} holds no key")
            self._stamp, self._file_digests = stamp, keys_read

    @staticmethod
    def _checked(keys: Iterable[str], setting: str) -> tuple[str, ...]:
        out = tuple(keys)
        for k in out:
            if not k or any(c.isspace() for c in k):
                raise ValueError(f"{setting}: an API key must be non-empty and contain no white space")
        return out

    def _read_file(self) -> tuple[tuple[int, int], tuple[bytes, ...]]:
        try:
            st = os.stat(self._file)
            with open(self._file, encoding="utf-8") as fh:
                keys = parse_keys_file(fh.read())
        except (OSError, UnicodeDecodeError) as exc:
            raise ValueError(f"ROLLOFF_API_KEYS_FILE: cannot read {self._file!r}: "
                             f"{exc.__class__.__name__}") from None
        self._checked(keys, "ROLLOFF_API_KEYS_FILE")
        return (st.st_mtime_ns, st.st_size), tuple(_digest(k) for k in keys)

    @property
    def enabled(self) -> bool:
        """True when at least one key is configured (directly or by file)."""
        return bool(self._direct) or bool(self._file)

    def _refresh(self) -> None:
        """Re-read the keys file when its mtime or size changed; keep the old keys on failure."""
        if not self._file:
            return
        try:
            st = os.stat(self._file)
            stamp = (st.st_mtime_ns, st.st_size)
        except OSError:
            stamp = None
        if stamp == self._stamp:
            return
        with self._lock:
            if stamp == self._stamp:
                return
            try:
                new_stamp, digests = self._read_file()
            except ValueError as exc:
                log.warning("keys file not reloaded, previous keys kept: %s", exc)
                self._stamp = stamp
                return
            if not digests:
                log.warning("keys file not reloaded, previous keys kept: it holds no key")
                self._stamp = new_stamp
                return
            self._stamp, self._file_digests = new_stamp, digests
            log.info("keys file reloaded (%d keys)", len(digests))

    def accepts(self, token: str) -> bool:
        """True when ``token`` equals one of the configured keys (constant-time comparison)."""
        self._refresh()
        presented = _digest(token)
        matched = False
        for known in self._direct + self._file_digests:
            # no short circuit: every key is compared whatever the outcome
            matched |= hmac.compare_digest(presented, known)
        return matched


def _challenge(error: str | None = None, description: str | None = None) -> str:
    value = f'Bearer realm="{REALM}"'
    if error:
        value += f', error="{error}"'
    if description:
        value += f', error_description="{description}"'
    return value


def bearer_token(header: str | None) -> str | None:
    """The token of an ``Authorization: Bearer <token>`` header, or None when there is none.

    The scheme name is case-insensitive (RFC 9110, section 11.1).
    """
    if not header:
        return None
    scheme, _, token = header.strip().partition(" ")
    if scheme.lower() != "bearer":
        return None
    token = token.strip()
    return token or None


def check_request(store: KeyStore) -> None:
    """Raise a 401 :class:`ProblemException` unless the current request may go on."""
    if not store.enabled or request.method == "OPTIONS":
        return
    path = request.path
    if path != PROTECTED_PREFIX and not path.startswith(PROTECTED_PREFIX + "/"):
        return
    token = bearer_token(request.headers.get("Authorization"))
    if token is None:
        raise ProblemException(
            401, "This endpoint needs an API key: send `Authorization: Bearer <key>`.",
            slug="unauthorized", title="Unauthorized",
            headers={"WWW-Authenticate": _challenge()})
    if not store.accepts(token):
        raise ProblemException(
            401, "The API key is not valid.", slug="invalid-api-key", title="Unauthorized",
            headers={"WWW-Authenticate": _challenge("invalid_token", "The API key is not valid")})


def install(app: Flask, settings: Settings) -> KeyStore:
    """Register the API-key check on ``app`` (a no-op check when no key is configured).

    Parameters
    ----------
    app : flask.Flask
    settings : service.config.Settings
        ``api_keys`` and ``api_keys_file`` are used.

    Returns
    -------
    KeyStore
        Also stored as ``app.extensions["rolloff_keys"]``.

    Raises
    ------
    ValueError
        When the keys file is configured but unreadable or empty.
    """
    store = KeyStore(settings.api_keys, settings.api_keys_file)
    app.extensions["rolloff_keys"] = store

    @app.before_request
    def _require_key() -> None:
        check_request(store)

    return store


# --- OpenAPI -----------------------------------------------------------------

BEARER_SCHEME = {
    "type": "http",
    "scheme": "bearer",
    "description": (
        "An API key as a bearer token: `Authorization: Bearer <key>`. Needed on every /v1 "
        "operation when the service is configured with keys (ROLLOFF_API_KEYS or "
        "ROLLOFF_API_KEYS_FILE); a service run without keys accepts requests without it. "
        "/healthz, /readyz and /metrics never need a key."),
}


class _SecurityDocPlugin(BasePlugin):
    """apispec plugin: the bearer requirement and a 401 on every /v1 operation.

    Hooked into ``spec.path()``, so it applies to every operation registered
    after it, whichever blueprint defines it.
    """

    def init_spec(self, spec) -> None:
        self.spec = spec

    def operation_helper(self, path=None, operations=None, **kwargs) -> None:
        if not path or not (path == PROTECTED_PREFIX or path.startswith(PROTECTED_PREFIX + "/")):
            return
        for method, operation in (operations or {}).items():
            if not isinstance(operation, dict) or method.startswith("x-") or method == "parameters":
                continue
            operation.setdefault("security", [{SCHEME_NAME: []}])
            operation.setdefault("responses", {}).setdefault("401", "UNAUTHORIZED")



def document(api) -> None:
    """Document the ``bearerAuth`` scheme and a 401 on every /v1 operation of ``api``.

    Call right after the flask-smorest ``Api`` is made and before blueprints
    are registered (the plugin sees each operation as it is added).

    Parameters
    ----------
    api : flask_smorest.Api
    """
    spec = api.spec
    spec.components.security_scheme(SCHEME_NAME, BEARER_SCHEME)
    plugin = _SecurityDocPlugin()
    plugin.init_spec(spec)
    spec.plugins.append(plugin)
