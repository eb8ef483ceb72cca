"""Transfer functions from requirements: the one path from a :class:`Requirement` to an approximation."""

from __future__ import annotations

from service.approximation import Approximation, design_by_order, design_by_requirement
from service.config import Settings
from service.workflows.costs import check_limit
from service.workflows.requirement import Requirement


def approximate(requirement: Requirement, settings: Settings, *, min_order: int | None = None) -> Approximation:
    """The transfer function ``requirement`` asks for (by order, or the lowest order meeting it, at least
    ``min_order`` when given).

    Raises
    ------
    LimitExceeded
        An order above ``ROLLOFF_MAX_ORDER``.
    ApproximationError, InfeasibleRequirement
        As :func:`service.approximation.design_by_requirement`.
    """
    r = requirement
    if r.family is None:
        from service.workflows.errors import RequirementError

        raise RequirementError("family is required to compute a transfer function", field="family")
    if not r.by_specification:
        check_limit("max_order", r.order, settings, field="order", what="order")
        return design_by_order(r.response, r.family, r.order, r.cutoff_hz,
                               passband_ripple_db=r.passband_ripple_db,
                               stopband_attenuation_db=r.stopband_attenuation_db, cutoff_at=r.cutoff_at,
                               section_order=r.section_order, max_order=settings.max_order)
    return design_by_requirement(r.response, r.family, r.passband_hz, r.stopband_hz, r.passband_ripple_db,
                                 r.stopband_attenuation_db, excess=r.excess, group_delay=r.group_delay,
                                 section_order=r.section_order, max_order=settings.max_order,
                                 min_order=min_order)


def compare(requirement: Requirement, settings: Settings, *, overshoot_limit_pct: float | None = None,
            group_delay_variation_limit_s: float | None = None):
    """Every family side by side for one requirement (by specification), each verified like a design.

    Returns
    -------
    service.response.Comparison
    """
    from service.response import compare_families

    r = requirement
    return compare_families(r.response, r.passband_hz, r.stopband_hz, r.passband_ripple_db, r.stopband_attenuation_db,
                            criteria=r.criteria(finite_opamps=False), overshoot_limit_pct=overshoot_limit_pct,
                            group_delay_variation_limit_s=group_delay_variation_limit_s, max_order=settings.max_order)
