"""Exceptions of the approximation layer.

Each one inherits a class of :mod:`service.errors` (and through it
:class:`ValueError`), so the api layer maps it to an HTTP problem by its base
class and plain Python callers can catch ``ValueError``.
"""

from __future__ import annotations

from service.errors import InfeasibleSpec, InvalidParameter


class ApproximationError(InvalidParameter):
    """A parameter of an approximation request is malformed or out of range."""


class UnsupportedOrder(ApproximationError):
    """The requested order is outside what the family (or the configured cap) allows.

    Attributes
    ----------
    order : int
        The order asked for.
    highest : int
        The highest order accepted for this family and cap.
    """

    def __init__(self, message: str, *, order: int, highest: int, field: str | None = "order"):
        super().__init__(message, field=field)
        self.order = order
        self.highest = highest


class InfeasibleRequirement(InfeasibleSpec):
    """A requirement cannot be met or makes no sense (the message names the failing condition)."""
