"""Tolerance runs: Monte Carlo, sensitivity, worst case and yield of a design document.

The yield verifies every trial's circuit against the requirement of the
document (or a mask given with the request) with the verifier designs use:
a trial passes exactly when a design with its part values would be said to
meet the requirement.  The cost of the run is checked before it starts.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Sequence

import numpy as np

from service.config import Settings
from service.response import FrequencyGrid, resolve_frequencies
from service.tolerance import EVERYTHING, Outputs, ToleranceResult, run_tolerance
from service.workflows import costs
from service.workflows.document import DesignDocument
from service.workflows.figures import tolerance_figure_grid, with_tolerance_figure
from service.workflows.masks import Mask, mask_criteria
from service.workflows.responding import DEFAULT_POINTS, default_grid
from service.workflows.verdicts import design_criteria, finite_opamps, slowest_gbw_hz


@dataclass(frozen=True)
class ToleranceRequest:
    """What ``/v1/tolerance`` asks for (see :func:`service.tolerance.run_tolerance` for the meaning)."""

    document: DesignDocument
    trials: int = 1000
    seed: int = 0
    distribution: str | dict = "gaussian"
    temperature: dict | None = None
    tempco_ppm_per_c: dict | None = None
    gbw_spread: float | None = None
    frequencies: FrequencyGrid | Sequence[float] | None = None
    mask: Mask | None = None
    sensitivity_frequencies_hz: tuple[float, ...] = ()
    include_trials: int = 0
    reply: str = "json"

    @property
    def figure(self) -> bool:
        """The reply is the SVG figure (its drawing is part of the cost)."""
        return self.reply == "svg"

    def outputs(self) -> Outputs:
        """What the reply (``json``, ``csv`` or ``svg``) shows, so what the run computes: everything for
        ``json``; the percentile table for ``csv``; for ``svg`` the magnitude envelope, the yield and the
        per-trial figures (the figure notes the passband ripple's median and largest value)."""
        if self.reply == "csv":
            return Outputs(figures=False, yield_=False, sensitivity=False)
        if self.reply == "svg":
            return Outputs(phase=False, sensitivity=False)
        return EVERYTHING


def tolerance(request: ToleranceRequest, settings: Settings, *, path: str = "design") -> ToleranceResult:
    """Run the tolerance analysis ``request`` asks for, after its cost check.

    Raises
    ------
    LimitExceeded, DocumentError, RealizationError, ToleranceError
    """
    costs.grid_points(request.frequencies, settings)
    costs.check_limit("max_trials", request.trials, settings, field="trials", what="trials")
    doc = request.document
    plans = doc.plans(path)
    finite = finite_opamps(plans)
    criteria = None
    if request.mask is not None:
        criteria = mask_criteria(request.mask, finite_opamps=finite, opamp_gbw_hz=slowest_gbw_hz(plans))
    elif doc.requirement is not None and doc.requirement.by_specification:
        criteria = design_criteria(doc.requirement, plans)
    grid = request.frequencies
    if grid is None:
        roots = [2 * np.pi * p.section.f0_hz for p in plans]
        grid = default_grid(np.array(roots), DEFAULT_POINTS)
        if request.figure:
            grid = tolerance_figure_grid(grid, criteria, doc.requirement, settings.max_frequency_points)
    points = len(resolve_frequencies(grid, settings.max_frequency_points))
    sens = len(request.sensitivity_frequencies_hz) or (2 * len(criteria.limits) if criteria else 0)
    shape = costs.CircuitShape.of(plans)
    outputs = request.outputs()
    costs.check_tolerance(shape, request.trials, points, sens, settings,
                          verified=criteria is not None and outputs.yield_, figure=request.figure)
    result = run_tolerance(
        plans, draw_order=doc.draw_order(), response=None if doc.response is None else doc.response.value,
        trials=request.trials, seed=request.seed, distribution=request.distribution,
        temperature=request.temperature, tempco_ppm_per_c=request.tempco_ppm_per_c, gbw_spread=request.gbw_spread,
        frequencies_hz=grid, criteria=criteria, sensitivity_frequencies_hz=request.sensitivity_frequencies_hz,
        include_trials=request.include_trials, memory_limit_bytes=settings.memory_limit_bytes,
        max_trials=settings.max_trials, max_frequency_points=settings.max_frequency_points,
        outputs=outputs, checked_plans=True)                    # doc.plans() checked them
    return with_tolerance_figure(result, doc, plans, criteria) if request.figure else result
