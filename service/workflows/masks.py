"""What a response or a Monte Carlo run is verified against: a requirement, or segments a caller lists.

Both become :class:`service.response.verification.Criteria`, the one input of
the verifier.  A listed segment with ``max_loss_db`` bounds the largest loss
(a passband: it also sets the reference gain), one with ``min_loss_db`` the
smallest (a stopband); a segment with both is both.  ``stop_hz`` null (or
absent) runs a stopband to infinity.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from service.response.verification import Band, Criteria, LossLimit
from service.workflows.errors import RequirementError
from service.workflows.requirement import Requirement


@dataclass(frozen=True)
class MaskSegment:
    """One listed segment: Hz and dB; at least one of the two loss bounds."""

    start_hz: float
    stop_hz: float | None
    max_loss_db: float | None = None
    min_loss_db: float | None = None


Mask = Requirement | tuple[MaskSegment, ...]


def segments_criteria(segments: tuple[MaskSegment, ...], path: str = "mask") -> Criteria:
    """The criteria of listed segments (see the module notes)."""
    limits = []
    for i, seg in enumerate(segments):
        where = f"{path}[{i}]"
        stop = math.inf if seg.stop_hz is None else float(seg.stop_hz)
        if seg.max_loss_db is None and seg.min_loss_db is None:
            raise RequirementError("a segment needs max_loss_db or min_loss_db", field=f"{where}.max_loss_db")
        if not stop > seg.start_hz:
            raise RequirementError("stop_hz must be above start_hz", field=f"{where}.stop_hz")
        if seg.max_loss_db is not None and seg.min_loss_db is not None and seg.min_loss_db > seg.max_loss_db:
            raise RequirementError("min_loss_db exceeds max_loss_db", field=f"{where}.min_loss_db")
        if seg.max_loss_db is not None:
            if not math.isfinite(stop):
                raise RequirementError("a segment bounding the largest loss (max_loss_db) needs a finite stop_hz",
                                       field=f"{where}.stop_hz")
            limits.append(LossLimit(Band.PASSBAND, seg.start_hz, stop, seg.max_loss_db))
        if seg.min_loss_db is not None:
            limits.append(LossLimit(Band.STOPBAND, seg.start_hz, stop, seg.min_loss_db,
                                    open_end=not math.isfinite(stop)))
    return Criteria(tuple(limits))


def mask_criteria(mask: Mask, *, finite_opamps: bool, opamp_gbw_hz: float | None = None,
                  path: str = "mask") -> Criteria:
    """The criteria of a mask given as a requirement (with the circuit's op-amps: see
    :meth:`Requirement.criteria`) or as segments."""
    if isinstance(mask, Requirement):
        return mask.criteria(finite_opamps=finite_opamps, opamp_gbw_hz=opamp_gbw_hz)
    return segments_criteria(mask, path)
