"""Strict reading of JSON-shaped input (a design document, a requirement) into typed values.

:class:`Fields` reads one JSON object at a field path: every key must be
known, every value of the expected type and range, and every failure names
its field.  It is the one reader of documents for HTTP callers (after the api
schema has parsed SI strings) and for Python callers alike.
"""

from __future__ import annotations

import math
from enum import Enum
from typing import Any, Iterable, Mapping, TypeVar

from service.units import QuantityError, parse_quantity
from service.workflows.errors import DocumentError

E = TypeVar("E", bound=Enum)


def join(path: str, key: str | int) -> str:
    """``path`` extended by an object key or an array index."""
    if isinstance(key, int):
        return f"{path}[{key}]"
    return f"{path}.{key}" if path else key


class Fields:
    """The fields of one JSON object at ``path``, read strictly.

    Parameters
    ----------
    data : object
        Must be a mapping.
    path : str
        Its field path (``""`` for the root).
    known : iterable of str
        Every key it may have; any other key raises naming it.
    error : type
        Exception class raised (a RolloffError subclass taking ``field=``).
    """

    def __init__(self, data: Any, path: str, known: Iterable[str], error: type = DocumentError):
        self.path = path
        self.error = error
        if not isinstance(data, Mapping):
            raise error(f"{path or 'the body'} must be an object", field=path or None)
        known = tuple(known)
        unknown = [k for k in data if k not in known]
        if unknown:
            raise error(f"unknown field {unknown[0]!r} in {path or 'the body'}: expected "
                        f"{', '.join(known)}", field=join(path, str(unknown[0])))
        self.data = data

    def at(self, key: str) -> str:
        return join(self.path, key)

    def has(self, key: str) -> bool:
        return self.data.get(key) is not None

    def raw(self, key: str) -> Any:
        return self.data.get(key)

    def _given(self, key: str, required: bool) -> tuple[str, Any]:
        """``(field path, value)`` of ``key``; the value is None when absent, which ``required`` refuses."""
        field = self.at(key)
        value = self.data.get(key)
        if value is None and required:
            raise self.error(f"{field} is required", field=field)
        return field, value

    def number(self, key: str, *, required: bool = False, low: float | None = None, high: float | None = None,
               positive: bool = False, unit: str | None = None, default: float | None = None) -> float | None:
        """A finite number (or an SI string in ``unit``) within ``[low, high]`` (and > 0 when ``positive``)."""
        field, value = self._given(key, required)
        if value is None:
            return default
        return number(value, field, low=low, high=high, positive=positive, unit=unit, error=self.error)

    def integer(self, key: str, *, required: bool = False, low: int | None = None, high: int | None = None,
                default: int | None = None) -> int | None:
        field, value = self._given(key, required)
        if value is None:
            return default
        if isinstance(value, bool) or not isinstance(value, int):
            if isinstance(value, float) and value.is_integer() and abs(value) < 2 ** 53:
                value = int(value)
            else:
                raise self.error(f"{field} must be an integer, got {value!r}", field=field)
        if (low is not None and value < low) or (high is not None and value > high):
            raise self.error(f"{field} must lie between {low} and {high}, got {value}", field=field)
        return int(value)

    def string(self, key: str, *, required: bool = False, max_length: int = 128,
               default: str | None = None) -> str | None:
        field, value = self._given(key, required)
        if value is None:
            return default
        if not isinstance(value, str) or not value or len(value) > max_length:
            raise self.error(f"{field} must be a non-empty string of at most {max_length} characters",
                             field=field)
        return value

    def boolean(self, key: str, *, default: bool = False) -> bool:
        field = self.at(key)
        value = self.data.get(key)
        if value is None:
            return default
        if not isinstance(value, bool):
            raise self.error(f"{field} must be true or false, got {value!r}", field=field)
        return value

    def enum(self, key: str, kind: type[E], *, required: bool = False, default: E | None = None) -> E | None:
        field, value = self._given(key, required)
        if value is None:
            return default
        try:
            return kind(value)
        except (ValueError, TypeError):
            raise self.error(f"{field} must be one of {', '.join(repr(e.value) for e in kind)}, got {value!r}",
                             field=field) from None

    def array(self, key: str, *, required: bool = False, max_items: int = 64) -> list | None:
        field, value = self._given(key, required)
        if value is None:
            return None
        if not isinstance(value, (list, tuple)):
            raise self.error(f"{field} must be an array", field=field)
        if len(value) > max_items:
            raise self.error(f"{field} has {len(value)} entries, at most {max_items} are accepted", field=field)
        return list(value)


def number(value: Any, field: str, *, low: float | None = None, high: float | None = None, positive: bool = False,
           unit: str | None = None, error: type = DocumentError) -> float:
    """``value`` as a finite float (a JSON number, or an SI-prefixed string in ``unit``), range-checked."""
    if isinstance(value, str):
        try:
            x = parse_quantity(value, unit)
        except QuantityError as exc:
            raise error(f"{field}: {exc.message}", field=field) from None
    elif isinstance(value, bool) or not isinstance(value, (int, float)):
        raise error(f"{field} must be a number, got {value!r}", field=field)
    else:
        try:
            x = float(value)
        except OverflowError:
            x = math.inf
    if not math.isfinite(x):
        raise error(f"{field} must be a finite number, got {value!r}", field=field)
    if positive and not x > 0:
        raise error(f"{field} must be positive, got {x:g}", field=field)
    if (low is not None and x < low) or (high is not None and x > high):
        raise error(f"{field} must lie between {low:g} and {high:g}, got {x:g}", field=field)
    return x
