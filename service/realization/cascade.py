"""Section order and gain distribution of a cascade of op-amp stages.

Sections are cascaded in ascending Q by default, the order that keeps the
signal level at the intermediate outputs lowest ahead of the high-Q
sections (R. Schaumann and M. E. Van Valkenburg, "Design of Analog Filters",
2001, sec. 6.2, from memory).  The gain of each stage is then chosen so that
no intermediate output peaks more than a margin above the filter's own output
level, the last stage with a free gain taking up whatever the earlier ones
leave (ibid., "dynamic range scaling").  Peaks are found on a logarithmic
frequency grid and refined by zooming twice on the largest sample.
"""

from __future__ import annotations

from typing import Callable

import numpy as np

from service.approximation.types import Section
from service.realization.errors import RealizationError
from service.realization.fit import standard_shape

SECTION_ORDERS = ("ascending_q", "descending_q", "given")

#: Points per decade of the coarse peak-search grid, and decades beyond the section frequencies.
GRID_POINTS_PER_DECADE = 60
GRID_DECADES_BEYOND = 2.0
#: Coarse local maxima of each curve refined by zooming.
PEAK_CANDIDATES = 3


def order_sections(sections: list[Section], section_order: str) -> list[int]:
    """Indices of ``sections`` in cascade order.

    ``"ascending_q"`` (first-order sections count as Q = 0.5 and come first),
    ``"descending_q"`` or ``"given"``; ties keep the given order.
    """
    if section_order not in SECTION_ORDERS:
        raise RealizationError(
            f"unknown section_order {section_order!r}: expected one of {', '.join(SECTION_ORDERS)}",
            field="section_order",
        )
    idx = list(range(len(sections)))
    if section_order == "given":
        return idx
    q = [0.5 if s.q is None else float(s.q) for s in sections]
    return sorted(idx, key=lambda i: q[i], reverse=(section_order == "descending_q"))


def analysis_grid(sections: list[Section]) -> np.ndarray:
    """Frequencies (Hz), shape (F,), log-spaced from 1/100 of the lowest to 100x the
    highest section frequency (pole or zero)."""
    fs = [s.f0_hz for s in sections] + [s.fz_hz for s in sections if s.fz_hz]
    lo = min(fs) / 10 ** GRID_DECADES_BEYOND
    hi = max(fs) * 10 ** GRID_DECADES_BEYOND
    n = int(np.ceil(np.log10(hi / lo) * GRID_POINTS_PER_DECADE)) + 1
    return np.logspace(np.log10(lo), np.log10(hi), n)


def grid_peak(magnitude: Callable[[np.ndarray], np.ndarray], grid_hz: np.ndarray,
              coarse: np.ndarray | None = None, *, zooms: int = 2, points: int = 41) -> tuple[np.ndarray, np.ndarray]:
    """Peak of several magnitude curves on a grid, refined by zooming.

    Parameters
    ----------
    magnitude : callable
        ``f (F,) -> |H| (K, F)`` for K curves.
    grid_hz : ndarray, shape (F,)
        Coarse grid (Hz), ascending.
    coarse : ndarray, shape (K, F), optional
        ``magnitude(grid_hz)`` if already computed.

    Returns
    -------
    peak : ndarray, shape (K,)
        Largest magnitude of each curve.
    f_peak : ndarray, shape (K,)
        Frequency (Hz) of the peak.
    """
    mag = magnitude(grid_hz) if coarse is None else coarse
    n_curves = mag.shape[0]
    # Refine around each curve's highest few coarse local maxima (ripple peaks of nearly equal height
    # can swap order between the coarse grid and the true response).
    interior = np.ones_like(mag, dtype=bool)
    if mag.shape[1] > 2:
        interior[:, 1:-1] = (mag[:, 1:-1] >= mag[:, :-2]) & (mag[:, 1:-1] >= mag[:, 2:])
        interior[:, 0] = mag[:, 0] >= mag[:, 1]
        interior[:, -1] = mag[:, -1] >= mag[:, -2]
    ranked = np.argsort(np.where(interior, -mag, np.inf), axis=1, kind="stable")[:, :PEAK_CANDIDATES]
    curve = np.repeat(np.arange(n_curves), ranked.shape[1])
    k = ranked.ravel()
    peak = mag[curve, k]
    fpk = grid_hz[k]
    step = np.log(grid_hz[1] / grid_hz[0]) if grid_hz.size > 1 else 0.01
    for _ in range(zooms):
        # One fine grid per (curve, candidate), evaluated for every curve (K is small).
        offs = np.linspace(-step, step, points)
        fine = (fpk[:, None] * np.exp(offs)[None, :])            # (K*C, P)
        m = magnitude(fine.ravel()).reshape(n_curves, fpk.size, points)
        own = m[curve, np.arange(fpk.size), :]                    # (K*C, P)
        j = np.argmax(own, axis=1)
        cand = own[np.arange(fpk.size), j]
        better = cand > peak
        peak = np.where(better, cand, peak)
        fpk = np.where(better, fine[np.arange(fpk.size), j], fpk)
        step = step * 2 / (points - 1)
    peak = peak.reshape(n_curves, -1)
    best = np.argmax(peak, axis=1)
    return peak[np.arange(n_curves), best], fpk.reshape(n_curves, -1)[np.arange(n_curves), best]


def gain_freedom(topology, section: Section, strategy: str) -> tuple[str, float]:
    """How a strategy constrains the stage gain.

    Returns
    -------
    mode : str
        ``"free"`` (any gain), ``"sign"`` (any magnitude, sign imposed) or ``"fixed"``.
    value : float
        For ``"sign"`` the sign (+1 or -1) of the realized gain; for
        ``"fixed"`` the imposed gain; 1.0 for ``"free"``.
    """
    try:
        forced = topology.forced_gain(section, strategy)
    except RealizationError:
        return "fixed", float(section.gain)
    arbitrary = getattr(topology, "arbitrary_gain", None)
    is_arbitrary = bool(arbitrary(section.kind, strategy)) if arbitrary is not None else forced is None
    if forced is None:
        return "free", 1.0
    if is_arbitrary and np.isclose(abs(forced), abs(section.gain)):
        return "sign", float(np.sign(forced))
    return "fixed", float(forced)


def distribute_gains(sections: list[Section], freedoms: list[tuple[str, float]], total_gain: float,
                     margin_db: float) -> tuple[list[float], dict]:
    """Stage gains for a cascade (in cascade order).

    Parameters
    ----------
    sections : list of Section
        In cascade order, with the approximation's gains.
    freedoms : list of (mode, value)
        From :func:`gain_freedom`, one per section.
    total_gain : float
        Product of the approximation's section gains (the filter's gain).
    margin_db : float
        How far (dB) an intermediate output may peak above the filter's output level.

    Returns
    -------
    gains : list of float
        Signed stage gains in the sections' standard forms.
    info : dict
        ``total_achieved`` (product of the gains) and ``absorber`` (index of
        the stage that took up the remaining gain, or None).
    """
    n = len(sections)
    grid = analysis_grid(sections)
    s = 2j * np.pi * grid
    shapes = np.array([np.abs(standard_shape(sec, s, sec.f0_hz, sec.q, sec.fz_hz)) for sec in sections])
    total_shape = np.prod(shapes, axis=0)
    level = abs(total_gain) * float(np.max(total_shape))
    limit = level * 10 ** (margin_db / 20)
    free = [i for i in range(n) if freedoms[i][0] != "fixed"]
    absorber = free[-1] if free else None
    mags = [0.0] * n
    for i in range(n):
        mode, val = freedoms[i]
        if mode == "fixed":
            mags[i] = abs(val)
    cum = np.ones_like(grid)
    for i in range(n):
        mode, val = freedoms[i]
        if i == absorber:
            others = np.prod([mags[j] for j in range(n) if j != i]) if n > 1 else 1.0
            mags[i] = abs(total_gain) / others if others > 0 else 1.0
        elif mode != "fixed":
            g = abs(sections[i].gain)
            pk = float(np.max(cum * shapes[i]))
            if i < n - 1 and g * pk > limit and pk > 0:
                g = level / pk
            mags[i] = g
        cum = cum * shapes[i] * mags[i]
    gains = []
    for i in range(n):
        mode, val = freedoms[i]
        sign = float(np.sign(sections[i].gain) or 1.0)
        if mode == "fixed":
            gains.append(float(val))
        elif mode == "sign":
            gains.append(float(val * mags[i]))
        else:
            gains.append(float(sign * mags[i]))
    return gains, {"total_achieved": float(np.prod(gains)), "absorber": absorber, "level": level}
