"""Approximation engine: prototypes, order selection, frequency transforms, sections.

Public surface::

    design_by_order(response, family, order, cutoff_hz, *, passband_ripple_db=None,
                    stopband_attenuation_db=None, cutoff_at="family",
                    section_order="ascending_q", max_order=20) -> Approximation
    design_by_requirement(response, family, passband_hz, stopband_hz,
                          passband_ripple_db, stopband_attenuation_db, *,
                          excess="stopband", group_delay=None,
                          section_order="ascending_q", max_order=20) -> Approximation
    zpk_response(zeros, poles, gain, w_rad_s) -> complex ndarray
    sections_response(sections, w_rad_s) -> complex ndarray
    section_polynomials(section) -> (b, a)
    sections_from_zpk(zeros, poles, gain, *, order="ascending_q") -> list[Section]
    family_info(family) -> FamilyInfo

Frequencies are Hz at this surface except where a name says ``rad_s``.
No I/O, no web framework: plain values in, plain values out, errors as
subclasses of :mod:`service.errors`.
"""

from .design import (Approximation, Edge, GroupDelayLimit, GroupDelayResult, design_by_order,
                     design_by_requirement)
from .enums import CutoffAt, Excess, SectionOrder
from .errors import ApproximationError, InfeasibleRequirement, UnsupportedOrder
from .evaluate import group_delay_s, loss_db, zpk_response
from .families import FamilyInfo, all_family_info, family_info
from .sections import section_polynomials, sections_from_zpk, sections_response
from .types import Family, ResponseType, Section, SectionKind
from .validation import (MAX_ATTENUATION_DB, MAX_FREQUENCY_HZ, MAX_RIPPLE_DB, MIN_FREQUENCY_HZ,
                         MIN_RIPPLE_DB)

__all__ = [
    "Family", "ResponseType", "SectionKind", "Section",
    "Approximation", "Edge", "GroupDelayLimit", "GroupDelayResult",
    "design_by_order", "design_by_requirement",
    "zpk_response", "sections_response", "section_polynomials", "sections_from_zpk",
    "loss_db", "group_delay_s",
    "family_info", "all_family_info", "FamilyInfo",
    "CutoffAt", "Excess", "SectionOrder",
    "ApproximationError", "InfeasibleRequirement", "UnsupportedOrder",
    "MIN_FREQUENCY_HZ", "MAX_FREQUENCY_HZ", "MIN_RIPPLE_DB", "MAX_RIPPLE_DB", "MAX_ATTENUATION_DB",
]
