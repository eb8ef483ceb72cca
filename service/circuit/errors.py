"""Exceptions of the circuit engine."""

from __future__ import annotations

from service.errors import InvalidParameter


class CircuitError(InvalidParameter):
    """A netlist or an analysis request is invalid.

    Raised for duplicate element names, unknown or floating nodes,
    non-positive R/L/C values, a missing or second input source, mismatched
    trial counts and structurally singular circuits.  The message names the
    element or node at fault.  Inherits :class:`ValueError` through
    :class:`service.errors.InvalidParameter`.
    """
