"""Strict reading of JSON request bodies, before any schema sees them.

Checks, in order: a body is present (400), its media type is JSON (415), it is
valid UTF-8 (400), it is one JSON document without duplicate object keys and
without numbers too long to convert (400), and it nests no deeper than the
configured limit (400). Body size is bounded earlier by Flask's
``MAX_CONTENT_LENGTH`` (413). ``NaN`` and ``Infinity`` literals are read as
floats here and rejected, with the field named, by the schemas (422).
"""

from __future__ import annotations

import json
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
        data = json.loads(text, object_pairs_hook=_pairs)
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
