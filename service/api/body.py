"""Request bodies: read in full (bounded in size and time), then parsed strictly as JSON.

:func:`read_body` reads the whole body before any view or compute slot sees
it: at most ``max_bytes`` (413 beyond, chunked bodies included, without
reading the rest), within ``timeout_s`` when the server offers a read
deadline (the project's gunicorn worker does: ``environ["rolloff.io_deadline"]``),
else 408; a malformed chunked encoding is a 400. The body then replaces the
WSGI input, so everything after reads it from memory.

:func:`read_json_body` checks, in order: a body is present (400), its media
type is JSON (415), it is valid UTF-8 (400), it is one JSON document without
duplicate object keys and without numbers too long to convert (400), and it
nests no deeper than the configured limit (400). An integer literal beyond
the range of a double is read as an infinite float, as a float literal such
as ``1e400`` is, so the schemas answer both with a 422 naming the field.
``NaN`` and ``Infinity`` literals are read as floats here and rejected, with
the field named, by the schemas (422).
"""

from __future__ import annotations

import io
import json
import math
from typing import Any

from flask import Request

from service.api.problems import ProblemException

_MISSING = object()


class _DuplicateKey(ValueError):
    pass


def _pairs(pairs: list[tuple[str, Any]]) -> dict[str, Any]:
    out: dict[str, Any] = {}
    for key, value in pairs:
        if key in out:
            raise _DuplicateKey(key)
        out[key] = value
    return out


def _depth(node: Any, limit: int) -> int:
    """Nesting depth of a parsed JSON value, iteratively (no recursion)."""
    deepest = 0
    stack = [(node, 1)]
    while stack:
        item, d = stack.pop()
        if isinstance(item, dict):
            children = item.values()
        elif isinstance(item, list):
            children = item
        else:
            continue
        deepest = max(deepest, d)
        if deepest > limit:
            return deepest
        stack.extend((c, d + 1) for c in children)
    return deepest


#: Bytes read from the WSGI input at a time.
READ_CHUNK = 64 * 1024

#: Magnitude from which an integer literal is read as an infinite float (the largest double is below it).
_FLOAT_OVERFLOW = 2 ** 1024


def _int_or_inf(text: str) -> int | float:
    """``parse_int`` of the JSON reader: an integer, or +-inf beyond the range of a double."""
    value = int(text)
    if abs(value) >= _FLOAT_OVERFLOW:
        return math.inf if value > 0 else -math.inf
    return value


def _content_length(environ: dict) -> int | None:
    raw = environ.get("CONTENT_LENGTH")
    if raw in (None, ""):
        return None
    try:
        value = int(raw)
    except ValueError:
        raise ProblemException(400, "The Content-Length header is not a number.", slug="malformed-body",
                               title="Bad Request", headers={"Connection": "close"}) from None
    if value < 0:
        raise ProblemException(400, "The Content-Length header is negative.", slug="malformed-body",
                               title="Bad Request", headers={"Connection": "close"})
    return value


def _too_large(max_bytes: int) -> ProblemException:
    return ProblemException(
        413, f"The request body exceeds the limit of {max_bytes} bytes (set by ROLLOFF_MAX_BODY_BYTES).",
        slug="body-too-large", title="Content Too Large", headers={"Connection": "close"},
        extra={"limit": "max_body_bytes", "limit_value": max_bytes, "setting": "ROLLOFF_MAX_BODY_BYTES"})


def _late(timeout_s: float) -> ProblemException:
    return ProblemException(
        408, f"The request body did not arrive within {timeout_s:g} s (set by ROLLOFF_BODY_TIMEOUT_S).",
        slug="body-timeout", title="Request Timeout", headers={"Connection": "close"},
        extra={"limit": "body_timeout_s", "limit_value": timeout_s, "setting": "ROLLOFF_BODY_TIMEOUT_S"})


def read_body(environ: dict, *, max_bytes: int, timeout_s: float) -> bytes:
    """Read the whole request body of a WSGI ``environ`` and put it back as an in-memory input.

    Parameters
    ----------
    environ : dict
        The WSGI environment; ``wsgi.input`` is replaced by the body read.
    max_bytes : int
        Largest body accepted.
    timeout_s : float
        Time the client gets to send the body, when the server offers a read
        deadline (``environ["rolloff.io_deadline"]``, with ``arm(seconds)``,
        ``disarm()`` and ``expired``).

    Returns
    -------
    bytes

    Raises
    ------
    ProblemException
        413 over ``max_bytes`` (a declared length is refused unread), 408 late,
        400 for a malformed chunked encoding or a body shorter than its
        Content-Length. Each closes the connection.
    """
    length = _content_length(environ)
    chunked = "chunked" in environ.get("HTTP_TRANSFER_ENCODING", "").lower()
    if length is not None and length > max_bytes:
        raise _too_large(max_bytes)
    if length is None and not chunked:
        length = 0
    stream = environ.get("wsgi.input")
    watch = environ.get("rolloff.io_deadline")
    want = max_bytes + 1 if length is None else length
    parts: list[bytes] = []
    got = 0
    if want and stream is not None:
        if watch is not None:
            watch.arm(timeout_s)
        try:
            while got < want:
                data = stream.read(min(READ_CHUNK, want - got))
                if not data:
                    break
                parts.append(data)
                got += len(data)
        except OSError:  # the connection timed out or was closed (a chunked body cut short)
            if watch is not None and watch.expired:
                raise _late(timeout_s) from None
            raise ProblemException(400, "The connection ended before the request body was complete.",
                                   slug="malformed-body", title="Bad Request",
                                   headers={"Connection": "close"}) from None
        except Exception as exc:  # the server's parser refused the chunked encoding
            raise ProblemException(
                400, f"The chunked request body is malformed ({exc.__class__.__name__}).",
                slug="malformed-body", title="Bad Request", headers={"Connection": "close"}) from None
        finally:
            if watch is not None:
                watch.disarm()
    if length is None and got > max_bytes:
        raise _too_large(max_bytes)
    if length is not None and got < length:
        if watch is not None and watch.expired:
            raise _late(timeout_s)
        raise ProblemException(400, f"The request body ended after {got} of the {length} bytes its "
                               "Content-Length announced.", slug="malformed-body", title="Bad Request",
                               headers={"Connection": "close"})
    body = b"".join(parts)
    environ["wsgi.input"] = io.BytesIO(body)
    environ["CONTENT_LENGTH"] = str(len(body))
    environ.pop("HTTP_TRANSFER_ENCODING", None)
    return body


def is_json_media_type(mimetype: str | None) -> bool:
    """``application/json`` or any ``application/*+json``."""
    if not mimetype:
        return False
    return mimetype == "application/json" or (mimetype.startswith("application/") and mimetype.endswith("+json"))


def read_json_body(req: Request, *, max_depth: int) -> Any:
    """The parsed JSON body of ``req`` or a :class:`ProblemException` saying what is wrong."""
    raw = req.get_data(cache=True)
    if not raw.strip():
        raise ProblemException(400, "The request body is empty; expected a JSON object.",
                               slug="malformed-body", title="Empty body")
    if not is_json_media_type(req.mimetype):
        raise ProblemException(
            415, f"Content-Type must be application/json, got {req.mimetype or 'none'!r}.",
            slug="unsupported-media-type", title="Unsupported Media Type")
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError as exc:
        raise ProblemException(400, f"The body is not valid UTF-8 (byte {exc.start}).",
                               slug="malformed-body", title="Malformed JSON") from None
    try:
        data = json.loads(text, object_pairs_hook=_pairs, parse_int=_int_or_inf)
    except _DuplicateKey as exc:
        raise ProblemException(400, f"Duplicate key {exc.args[0]!r} in a JSON object.",
                               slug="malformed-body", title="Malformed JSON",
                               errors={str(exc.args[0]): ["duplicate key"]}) from None
    except json.JSONDecodeError as exc:
        raise ProblemException(400, f"The body is not valid JSON: {exc.msg} at line {exc.lineno} "
                               f"column {exc.colno}.", slug="malformed-body", title="Malformed JSON") from None
    except RecursionError:
        raise ProblemException(400, f"The JSON body nests deeper than {max_depth} levels.",
                               slug="malformed-body", title="Malformed JSON") from None
    except ValueError as exc:  # e.g. an integer literal with thousands of digits
        raise ProblemException(400, f"The body is not valid JSON: {exc}.",
                               slug="malformed-body", title="Malformed JSON") from None
    if _depth(data, max_depth) > max_depth:
        raise ProblemException(400, f"The JSON body nests deeper than {max_depth} levels.",
                               slug="malformed-body", title="Malformed JSON")
    return data
