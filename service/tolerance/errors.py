"""Errors of the tolerance analysis.

Each inherits :class:`service.errors.RolloffError` (through
``InvalidParameter``) and :class:`ValueError`, and names the public request
field it is about in ``field``.  A trial count above the configured limit is
:class:`service.errors.LimitExceeded` (``limit="max_trials"``).
"""

from __future__ import annotations

from service.errors import InvalidParameter


class ToleranceError(InvalidParameter):
    """A tolerance request the analysis cannot run (bad distribution, tolerance, range...)."""


class InvalidDistribution(ToleranceError):
    """An unknown distribution name or kind key."""


class InvalidTolerance(ToleranceError):
    """A part tolerance, temperature range, temperature coefficient or GBW spread out of range."""


__all__ = ["ToleranceError", "InvalidDistribution", "InvalidTolerance"]
