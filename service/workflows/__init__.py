"""The owner of the job: requirements, design documents, "design, then verify", and what every request costs.

Between the HTTP layer (``service.api``) and the computation packages, this
package holds the typed :class:`Requirement` and :class:`DesignDocument` (read
once, strictly, at the boundary), the margin policy and gain handling
(:mod:`.policy`), the verdict of realized designs (:mod:`.verdicts`, one
verifier for designs, edited documents, response masks and Monte Carlo
trials), the noise, headroom and supply of a design's circuit
(:mod:`.electrical`), and the cost model of every request (:mod:`.costs`,
checked before work starts).  A Python caller gets exactly what an HTTP caller gets.

Public surface
--------------
Types: :class:`Requirement`, :class:`DesignDocument`, :class:`DesignSettings`, :class:`DesignRequest`,
:class:`DesignOutcome`, :class:`ResponseRequest`, :class:`ResponseOutcome`, :class:`Zpk`,
:class:`ToleranceRequest`, :class:`MaskSegment`, :class:`DesignVerdict`, :class:`SupplySettings`,
:class:`NoiseRequest`, :class:`HeadroomRequest`.
Functions: :func:`approximate`, :func:`compare`, :func:`design`, :func:`evaluate`, :func:`evaluate_json`,
:func:`outcome_of` (the document of a design realized directly), :func:`respond`, :func:`tolerance`.
Errors: :class:`WorkflowError`, :class:`DocumentError`, :class:`RequirementError`, :class:`UnrepresentableDesign`.
"""

from service.workflows.approximating import approximate, compare
from service.workflows.designing import DesignOutcome, DesignRequest, design, evaluate, evaluate_json, outcome_of
from service.workflows.document import DesignDocument, DesignSettings, PartRange, StageEntry
from service.workflows.electrical import HeadroomRequest, NoiseRequest, SupplySettings
from service.workflows.errors import DocumentError, RequirementError, UnrepresentableDesign, WorkflowError
from service.workflows.masks import MaskSegment
from service.workflows.requirement import Requirement
from service.workflows.responding import ResponseOutcome, ResponseRequest, Zpk, respond
from service.workflows.tolerancing import ToleranceRequest, tolerance
from service.workflows.verdicts import DesignVerdict

__all__ = [
    "Requirement", "DesignDocument", "DesignSettings", "PartRange", "StageEntry", "DesignRequest", "DesignOutcome",
    "ResponseRequest", "ResponseOutcome", "Zpk", "ToleranceRequest", "MaskSegment", "DesignVerdict",
    "SupplySettings", "NoiseRequest", "HeadroomRequest",
    "approximate", "compare", "design", "evaluate", "evaluate_json", "outcome_of", "respond", "tolerance",
    "WorkflowError", "DocumentError", "RequirementError", "UnrepresentableDesign",
]
