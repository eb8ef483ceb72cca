"""Exceptions of the realization layer.

Every error raised by :mod:`service.realization` derives from
:class:`RealizationError`, which is an :class:`~service.errors.InvalidParameter`
(and therefore a :class:`ValueError`).  Subclasses narrow the reason; the api
layer maps them to HTTP problems.  New subclasses are appended at the end.
"""

from __future__ import annotations

from service.errors import InvalidParameter


class RealizationError(InvalidParameter):
    """A section cannot be realized as asked (topology, strategy or part values)."""


class UnsupportedSection(RealizationError):
    """A topology was asked to realize a section kind or order it does not realize."""


class UnknownTopology(RealizationError):
    """A topology name that is not in the registry."""


class UnknownStrategy(RealizationError):
    """A design strategy the topology does not offer for the section."""


class RatioLimitViolated(RealizationError):
    """The chosen free components violate the ratio limit a design strategy implies."""


class UnknownPartKind(RealizationError):
    """A part kind other than resistor or capacitor (in a parts policy or a design document)."""


class NoUsableParts(RealizationError):
    """A stock list or series range leaves no value of a kind the design needs."""


class InfeasibleStage(RealizationError):
    """No candidate part set realizes a section with the chosen topology and parts."""


class InvalidDocument(RealizationError):
    """A design document that cannot be evaluated (repeated ref, missing or mistyped part)."""


class WrongLength(RealizationError):
    """A per-section list (topologies, strategies) whose length differs from the number of sections."""
