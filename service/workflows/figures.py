"""What a figure needs from the request beyond the result it draws: its title, and a dense passband.

The figures (:mod:`service.response.plotting`, :mod:`service.tolerance.plotting`)
are pure drawings of a result. This module, which knows the request, adds
what they cannot know:

- the title (:mod:`service.workflows.titles`);
- for a response figure, the response evaluated at :data:`DETAIL_POINTS`
  frequencies over the passband(s), so the passband detail shows the ripple
  whatever the display grid (a 0.1 dB ripple of a narrow bandpass falls
  between the points of a 501-point grid over six decades);
- for a tolerance figure without a caller's grid, Monte Carlo frequencies
  over the passband(s) up to :data:`TOLERANCE_DETAIL_POINTS` there (the
  percentiles exist only where the run evaluates the trials), and the
  nominal design's verdict (where a segment's worst point is when the run
  located no trial's).

The passband is the one the response's metrics used (a mask's passband
segments, ``passband_hz``, a requirement's edges), else the document's
requirement, else the cutoff of a by-order design whose cutoff is a passband
edge (every family but Chebyshev II, whose cutoff is its stopband edge),
else the half-power band around the peak. Frequencies in Hz, gains in dB.
"""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np

from service.approximation import Family, ResponseType
from service.response import ResponseResult, resolve_frequencies
from service.response.figure_inputs import (PassbandDetail, frequency_view, half_power_band, passband_window,
                                            reference_gain)
from service.response.systems import as_system
from service.response.verification import Band, Criteria, verify
from service.response.zpk import magnitude_db
from service.workflows.document import DesignDocument
from service.workflows.requirement import Requirement
from service.workflows.titles import document_subject, figure_subject
from service.workflows.verdicts import circuit_roots

#: Frequencies of a response figure's passband detail.
DETAIL_POINTS = 400
#: Monte Carlo frequencies a tolerance figure wants over the passband(s) when the caller gave no grid.
TOLERANCE_DETAIL_POINTS = 300
#: A passband window wider than this ratio is sampled (and drawn) on a log axis.
LOG_WINDOW_RATIO = 5.0


def requirement_passbands(req: Requirement | None) -> list[tuple[float, float]] | None:
    """The passband intervals (Hz; an open band ends at ``inf``) a requirement states, or None.

    By specification: its ``passband_hz`` (an open band up to ``passband_upper_hz`` when stated). By order:
    its ``cutoff_hz`` as a passband edge, except for Chebyshev II (a stopband edge).
    """
    if req is None:
        return None
    if req.by_specification:
        edge, upper = req.passband_hz, req.passband_upper_hz or math.inf
    elif req.family is Family.CHEBYSHEV2 or req.cutoff_hz is None:
        return None
    else:
        edge, upper = req.cutoff_hz, math.inf
    rt = req.response
    if rt is ResponseType.LOWPASS:
        return [(0.0, float(edge))]
    if rt is ResponseType.HIGHPASS:
        return [(float(edge), upper)]
    lo, hi = float(edge[0]), float(edge[1])
    return [(lo, hi)] if rt is ResponseType.BANDPASS else [(0.0, lo), (hi, upper)]


def _requirement_of(system) -> Requirement | None:
    if isinstance(system, Requirement):
        return system
    if isinstance(system, DesignDocument):
        return system.requirement
    return None


def response_passbands(result: ResponseResult, requirement: Requirement | None) -> list[tuple[float, float]]:
    """The passband intervals (Hz) of a response figure (see the module notes)."""
    if result.passbands_hz:
        return [tuple(b) for b in result.passbands_hz]
    stated = requirement_passbands(requirement)
    if stated:
        return stated
    log_x, pos = frequency_view(result.frequency_hz)
    mag = np.asarray(result.magnitude_db, dtype=float)[pos]
    ref = reference_gain(result.verdict, result.metrics.passband_gain_db, mag)
    return half_power_band(np.asarray(result.frequency_hz, dtype=float)[pos], mag, ref)


def _window_grid(lo: float, hi: float, points: int, log_x: bool) -> tuple[np.ndarray, bool]:
    log = bool(log_x and lo > 0 and hi / lo > LOG_WINDOW_RATIO)
    return (np.geomspace(lo, hi, points) if log else np.linspace(lo, hi, points)), log


def passband_detail(result: ResponseResult, display, requirement: Requirement | None) -> PassbandDetail | None:
    """The response of ``display`` at :data:`DETAIL_POINTS` frequencies (Hz) over its passband(s) within the
    plotted range, with the verifier's passband worst points; None when no passband is plotted.

    Parameters
    ----------
    result : ResponseResult
        The analysed response (its grid, verdict and passbands).
    display : object
        What was analysed (an approximation, a ZpkSystem or a CircuitSystem): evaluated again, exactly as
        the result's magnitude was.
    requirement : Requirement or None
        The requirement of the system, for its passband when the result states none.
    """
    f = np.asarray(result.frequency_hz, dtype=float)
    log_x, pos = frequency_view(f)
    if not pos.any():
        return None
    bands = response_passbands(result, requirement)
    window = passband_window(bands, float(f[pos][0]), float(f[pos][-1]))
    if window is None:
        return None
    fd, log = _window_grid(*window, DETAIL_POINTS, log_x)
    extra = [s.worst_hz for s in (result.verdict.segments if result.verdict is not None else ())
             if s.limit.band is Band.PASSBAND and window[0] <= s.worst_hz <= window[1]]
    extra += [e for band in bands for e in band if window[0] <= e <= window[1]]
    fd = np.unique(np.concatenate([fd, np.asarray(extra, dtype=float)]))
    mag = magnitude_db(as_system(display).evaluate(fd))
    return PassbandDetail(fd, np.asarray(mag, dtype=float), tuple((float(a), float(b)) for a, b in bands), log)


def with_figure(result: ResponseResult, system, display) -> ResponseResult:
    """``result`` with its figure's title and passband detail (see the module notes).

    Parameters
    ----------
    result : ResponseResult
    system : Requirement, Zpk, tuple of Section, or DesignDocument
        What the request asked for.
    display : object
        What was analysed for it.
    """
    requirement = _requirement_of(system)
    return replace(result, subject=figure_subject(system, display, result.response_type),
                   detail=passband_detail(result, display, requirement))


def with_tolerance_figure(result, document: DesignDocument, plans, criteria: Criteria | None):
    """A tolerance run's ``result`` with its figure's title and, given ``criteria``, the nominal design's
    verdict (the verifier of every design: where a segment's worst point is when no trial's was located).

    Parameters
    ----------
    result : ToleranceResult
    document : DesignDocument
    plans : list of StagePlan
        The document's stages, as the run used them.
    criteria : Criteria or None
        What the trials were verified against.
    """
    nominal = None
    if criteria is not None:
        nominal = verify(circuit_roots(plans), criteria).verdict()
    return replace(result, subject=document_subject(document), nominal_verdict=nominal)


def tolerance_figure_grid(grid, criteria: Criteria | None, requirement: Requirement | None,
                          max_points: int) -> np.ndarray:
    """The frequencies (Hz) of a tolerance run drawn as a figure: ``grid`` with more over the passband(s)
    (the criteria's passband segments, else the requirement's) when it has fewer than
    :data:`TOLERANCE_DETAIL_POINTS` there, within ``max_points`` in all."""
    f = resolve_frequencies(grid, max_points)
    bands = None
    if criteria is not None:
        bands = [(lim.start_hz, lim.stop_hz) for lim in criteria.limits if lim.band is Band.PASSBAND]
    bands = bands or requirement_passbands(requirement)
    log_x, pos = frequency_view(f)
    window = passband_window(bands, float(f[pos][0]), float(f[pos][-1])) if pos.any() and bands else None
    if window is None:
        return f
    have = int(np.count_nonzero((f >= window[0]) & (f <= window[1])))
    room = min(TOLERANCE_DETAIL_POINTS - have, max_points - f.size - 2)
    if room < TOLERANCE_DETAIL_POINTS // 4:
        return f
    extra, _ = _window_grid(*window, room + 2, log_x)       # its ends may be points of the grid already
    return np.unique(np.concatenate([f, extra]))


__all__ = ["with_figure", "with_tolerance_figure", "passband_detail", "response_passbands", "requirement_passbands",
           "tolerance_figure_grid", "DETAIL_POINTS", "TOLERANCE_DETAIL_POINTS"]
