"""Responses: the frequency and time response of a transfer function or a design, verified against a mask.

:func:`respond` takes one system -- a requirement or order (the ideal
transfer function), zeros/poles/gain, standard-form sections, or a design
document (analysed at circuit level with its part values and op-amp models) --
and returns the response with its metrics and, given a mask, the verdict of
the one verifier (:mod:`service.response.verification`), exactly as a design
is verified.  A design document may also ask for its ``noise`` (output noise
density on the response's grid, integrated noise, ranked contributions, SNR
and dynamic range) and ``headroom`` (every op-amp output's level against its
range): :mod:`service.workflows.electrical`, on the document's supply.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Sequence

import numpy as np

from service.approximation import Section
from service.circuit.roots import RootSet
from service.config import Settings
from service.response import CircuitSystem, FrequencyGrid, TimeGrid, ZpkSystem, analyze, resolve_frequencies
from service.response.result import ResponseResult
from service.response.verification import verify
from service.workflows import costs
from service.workflows.approximating import approximate
from service.workflows.document import DesignDocument
from service.workflows.electrical import (HeadroomRequest, NoiseRequest, ResponseLevels, check_response_levels,
                                          response_levels)
from service.workflows.errors import WorkflowError
from service.workflows.figures import with_figure
from service.workflows.masks import Mask, mask_criteria
from service.workflows.requirement import Requirement
from service.workflows.verdicts import circuit_roots, finite_opamps, section_roots, slowest_gbw_hz

#: Points of the default frequency grid.
DEFAULT_POINTS = 501


@dataclass(frozen=True)
class Zpk:
    """A transfer function by its zeros and poles (rad/s) and real factor ``gain``."""

    zeros: tuple[complex, ...]
    poles: tuple[complex, ...]
    gain: float


System = Requirement | Zpk | tuple[Section, ...] | DesignDocument


@dataclass(frozen=True)
class ResponseRequest:
    """What ``/v1/responses`` asks for.

    Attributes
    ----------
    system : Requirement, Zpk, tuple of Section, or DesignDocument
    frequencies : FrequencyGrid or sequence of float or None
        Display grid (Hz); None: :data:`DEFAULT_POINTS` log-spaced points around the system's roots.
    time : TimeGrid or None
    mask : Requirement or tuple of MaskSegment or None
    passband_hz : float or (float, float) or None
    attenuation_at_hz : tuple of float
    figure : bool
        An SVG figure will be drawn (costed).
    noise : NoiseRequest or None
        Design documents: the noise section (see :class:`NoiseRequest`).
    headroom : HeadroomRequest or None
        Design documents: the levels of every op-amp output (see :class:`HeadroomRequest`).
    """

    system: System
    frequencies: FrequencyGrid | Sequence[float] | None = None
    time: TimeGrid | None = None
    mask: Mask | None = None
    passband_hz: float | tuple[float, float] | None = None
    attenuation_at_hz: tuple[float, ...] = ()
    figure: bool = False
    default_points: int = DEFAULT_POINTS
    noise: NoiseRequest | None = None
    headroom: HeadroomRequest | None = None


@dataclass
class ResponseOutcome:
    """A response (:class:`ResponseResult`) with the noise and headroom sections of a design.

    ``as_dict`` is the reply (``noise`` and ``headroom`` null when not asked); ``table`` adds the noise
    densities and op-amp levels as columns of the frequency table.
    """

    result: ResponseResult
    levels: ResponseLevels = field(default_factory=ResponseLevels)

    @property
    def verdict(self):
        return self.result.verdict

    def as_dict(self) -> dict:
        return {**self.result.as_dict(), **self.levels.as_dict()}

    def table(self, kind: str = "frequency") -> dict[str, np.ndarray]:
        cols = self.result.table(kind)
        return {**cols, **self.levels.columns()} if kind == "frequency" else cols

    def svg(self) -> bytes:
        return self.result.svg()


#: Roots this many times slower than the fastest are taken for roots at the origin (rounding) by the default grid.
ORIGIN_RATIO = 1e-9


def default_grid(roots_rad_s: np.ndarray, points: int) -> FrequencyGrid:
    """Log-spaced points from 1/100 of the slowest to 100x the fastest root frequency (Hz).

    Roots at the origin, and those within :data:`ORIGIN_RATIO` of it relative to the fastest (an exact zero at
    s = 0 computed with rounding), set no frequency.
    """
    mags = np.abs(np.asarray(roots_rad_s, dtype=complex))
    mags = mags[np.isfinite(mags) & (mags > 0)]
    if mags.size:
        mags = mags[mags >= ORIGIN_RATIO * mags.max()]
    mags = mags / (2 * np.pi)
    low, high = (float(mags.min()), float(mags.max())) if mags.size else (1.0, 1.0)
    return FrequencyGrid(low / 100.0, high * 100.0, points, "log")


def _system(system: System, settings: Settings, path: str):
    """(display system, roots, response type, finite op-amps, plans or None)."""
    if isinstance(system, Requirement):
        approx = approximate(system, settings)
        return approx, RootSet.from_zpk(approx.zeros, approx.poles, approx.gain), approx.response, False, None
    if isinstance(system, Zpk):
        zpk = ZpkSystem(np.array(system.zeros, dtype=complex), np.array(system.poles, dtype=complex), system.gain)
        return zpk, RootSet.from_zpk(zpk.zeros, zpk.poles, zpk.gain), None, False, None
    if isinstance(system, DesignDocument):
        plans = system.plans(path)
        from service.realization import cascade_circuit

        return (CircuitSystem(cascade_circuit(plans)), circuit_roots(plans), system.response, finite_opamps(plans),
                plans)
    sections = tuple(system)
    zpk = ZpkSystem.from_sections(sections)
    return zpk, RootSet.from_zpk(zpk.zeros, zpk.poles, zpk.gain), None, False, None


def respond(request: ResponseRequest, settings: Settings, *, path: str = "design") -> ResponseOutcome:
    """The response, metrics and (with a mask) verdict of ``request.system``, with its noise and headroom.

    Raises
    ------
    LimitExceeded, InvalidGrid, InvalidMask, ImproperSystem, DocumentError, RealizationError
    WorkflowError
        ``noise`` or ``headroom`` of a transfer function (it has no circuit), a noise band outside the grid.
    InvalidLevel
        A headroom level whose input swings beyond the rails.
    """
    for name in ("noise", "headroom"):
        if getattr(request, name) is not None and not isinstance(request.system, DesignDocument):
            raise WorkflowError(f"{name} needs a circuit: give a design document (design) rather than a transfer "
                                "function, whose parts, op-amps and supply are unknown", field=name)
    costs.grid_points(request.frequencies, settings)
    if request.time is not None and request.time.points is not None:
        costs.check_limit("max_time_points", request.time.points, settings, field="time.points", what="time points")
    display, roots, response, finite, plans = _system(request.system, settings, path)
    grid = request.frequencies
    if grid is None and plans is not None:
        # a circuit: around what its stages do (their sections), not its op-amps' own poles
        grid = default_grid(np.array([2 * np.pi * f for p in plans for f in (p.section.f0_hz, p.section.fz_hz)
                                      if f]), request.default_points)
    elif grid is None:
        grid = default_grid(np.concatenate([roots.zeros.ravel(), roots.poles.ravel()]), request.default_points)
    points = len(resolve_frequencies(grid, settings.max_frequency_points))
    time_points = (request.time.points or 0) if request.time is not None else 0
    shape = None
    if plans is not None:
        shape = costs.CircuitShape.of(plans)
    costs.check_response(shape, points, time_points, settings, figure=request.figure)
    asks_levels = request.noise is not None or request.headroom is not None
    if asks_levels:
        check_response_levels(plans, request.system.settings.supply, points, request.noise, request.headroom,
                              settings, costs.response_units(shape, points, time_points, figure=request.figure),
                              resolve_frequencies(grid, settings.max_frequency_points))
    verdict = None
    if request.mask is not None:
        gbw = None if plans is None else slowest_gbw_hz(plans)
        verdict = verify(roots, mask_criteria(request.mask, finite_opamps=finite, opamp_gbw_hz=gbw)).verdict()
    result = analyze(display, grid, time=request.time, verdict=verdict, response_type=response,
                     passband_hz=request.passband_hz, attenuation_at_hz=request.attenuation_at_hz,
                     max_points=settings.max_frequency_points, max_time_points=settings.max_time_points)
    if request.figure:
        result = with_figure(result, request.system, display)
    levels = ResponseLevels()
    if asks_levels:
        levels = response_levels(plans, request.system.settings, result.frequency_hz, request.noise,
                                 request.headroom)
    return ResponseOutcome(result, levels)


__all__ = ["ResponseRequest", "ResponseOutcome", "Zpk", "respond", "default_grid", "section_roots"]
