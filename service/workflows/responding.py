"""Responses: the frequency and time response of a transfer function or a design, verified against a mask.

:func:`respond` takes one system -- a requirement or order (the ideal
transfer function), zeros/poles/gain, standard-form sections, or a design
document (analysed at circuit level with its part values and op-amp models) --
and returns the response with its metrics and, given a mask, the verdict of
the one verifier (:mod:`service.response.verification`), exactly as a design
is verified.
"""

from __future__ import annotations

from dataclasses import dataclass
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
    """

    system: System
    frequencies: FrequencyGrid | Sequence[float] | None = None
    time: TimeGrid | None = None
    mask: Mask | None = None
    passband_hz: float | tuple[float, float] | None = None
    attenuation_at_hz: tuple[float, ...] = ()
    figure: bool = False
    default_points: int = DEFAULT_POINTS


def default_grid(roots_rad_s: np.ndarray, points: int) -> FrequencyGrid:
    """Log-spaced points from 1/100 of the slowest to 100x the fastest root frequency (Hz)."""
    mags = np.abs(np.asarray(roots_rad_s, dtype=complex))
    mags = mags[np.isfinite(mags) & (mags > 0)] / (2 * np.pi)
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


def respond(request: ResponseRequest, settings: Settings, *, path: str = "design") -> ResponseResult:
    """The response, metrics and (with a mask) verdict of ``request.system``.

    Raises
    ------
    LimitExceeded, InvalidGrid, InvalidMask, ImproperSystem, DocumentError, RealizationError
    """
    costs.grid_points(request.frequencies, settings)
    if request.time is not None and request.time.points is not None:
        costs.check_limit("max_time_points", request.time.points, settings, field="time.points", what="time points")
    display, roots, response, finite, plans = _system(request.system, settings, path)
    grid = request.frequencies
    if grid is None:
        grid = default_grid(np.concatenate([roots.zeros.ravel(), roots.poles.ravel()]), request.default_points)
    points = len(resolve_frequencies(grid, settings.max_frequency_points))
    time_points = (request.time.points or 0) if request.time is not None else 0
    shape = None
    if plans is not None:
        shape = costs.CircuitShape(tuple(len(p.opamps) for p in plans),
                                   loaded=any((u.rout_ohm or 0.0) > 0 for p in plans for u in p.opamps))
    costs.check_response(shape, points, time_points, settings, figure=request.figure)
    verdict = None
    if request.mask is not None:
        gbw = None if plans is None else slowest_gbw_hz(plans)
        verdict = verify(roots, mask_criteria(request.mask, finite_opamps=finite, opamp_gbw_hz=gbw)).verdict()
    result = analyze(display, grid, time=request.time, verdict=verdict, response_type=response,
                     passband_hz=request.passband_hz, attenuation_at_hz=request.attenuation_at_hz,
                     max_points=settings.max_frequency_points, max_time_points=settings.max_time_points)
    return with_figure(result, request.system, display) if request.figure else result


__all__ = ["ResponseRequest", "Zpk", "respond", "default_grid", "section_roots"]
