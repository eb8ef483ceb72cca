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
