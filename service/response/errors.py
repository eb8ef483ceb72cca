"""Exceptions of the response layer.

Each is a narrow subclass of a :mod:`service.errors` class, so it also is a
:class:`ValueError` and the api layer maps it through its one table.
"""

from __future__ import annotations

from service.errors import InvalidParameter


class InvalidGrid(InvalidParameter):
    """A frequency or time grid is malformed (empty, unordered, non-finite...)."""


class InvalidMask(InvalidParameter):
    """A requirement mask is malformed (edges out of order, no bound, ...)."""


class ImproperSystem(InvalidParameter):
    """A transfer function cannot be analysed (more zeros than poles, unstable...)."""


class InvalidLevel(InvalidParameter):
    """A noise or headroom option is out of range (band, temperature, signal level, swing)."""
