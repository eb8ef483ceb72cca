"""Exceptions of the workflow layer (all 4xx problems at the api, by the one mapping table).

Each names the field it is about with a path from the root of the request
body (``"design.stages[2].components[0].value"``; array indices count from 0,
stage *numbers* in messages from 1).
"""

from __future__ import annotations

from service.errors import InfeasibleSpec, InvalidParameter


class WorkflowError(InvalidParameter):
    """A request that the workflow cannot carry out as asked."""


class DocumentError(WorkflowError):
    """A design document (or part of one) that cannot be read: unknown key, wrong type, bad value."""


class RequirementError(InfeasibleSpec):
    """A requirement that makes no sense: reversed or overlapping edges, a limit where it has no meaning."""


class UnrepresentableDesign(InfeasibleSpec):
    """A design whose parts or gains leave the range the service represents and reads back."""


class YieldUnreachable(InfeasibleSpec):
    """A yield target no design and grades within the search's bounds reach.

    ``details`` (plain JSON values) are added to the problem: the limiting requirement edge (band,
    segment, frequency) and the parts that limit it, the best estimated and confirmed yields, the rounds.
    """

    def __init__(self, message: str, *, field: str | None = None, details: dict | None = None):
        super().__init__(message, field=field)
        self.details = dict(details or {})
