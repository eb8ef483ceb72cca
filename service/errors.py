"""Base exception of every rolloff computation layer.

Each computation package (approximation, circuit, components, realization,
response, tolerance) defines narrow subclasses of :class:`RolloffError` that
also inherit a built-in exception (usually :class:`ValueError`), so plain
Python callers can catch them naturally.  The api layer maps them to HTTP
problems in one table (``service/api/problems.py``); nothing here knows HTTP.
"""

from __future__ import annotations


class RolloffError(Exception):
    """Root of all rolloff computation errors.

    Parameters
    ----------
    message : str
        A sentence a caller can read: what failed and why.
    field : str, optional
        The request field the failure is about (dotted path such as
        ``"parts.resistors.series"``), when there is one.
    """

    def __init__(self, message: str, *, field: str | None = None):
        super().__init__(message)
        self.message = message
        self.field = field


class InvalidParameter(RolloffError, ValueError):
    """A parameter is outside what the computation accepts."""


class InfeasibleSpec(RolloffError, ValueError):
    """A requirement cannot be met or makes no sense (e.g. stopband inside passband)."""


class LimitExceeded(RolloffError, ValueError):
    """A request asks for more work than the configured limits allow.

    Parameters
    ----------
    limit : str
        Name of the limit (``"max_order"``).
    value : int or float
        The configured value of the limit.
    setting : str
        The environment variable that sets it (``"ROLLOFF_MAX_ORDER"``).
    """

    def __init__(self, message: str, *, limit: str, value, setting: str, field: str | None = None):
        super().__init__(message, field=field)
        self.limit = limit
        self.value = value
        self.setting = setting
