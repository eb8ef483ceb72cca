"""Section order and gain distribution of a cascade of op-amp stages.

Sections are cascaded in ascending Q by default, the order that keeps the
signal level at the intermediate outputs lowest ahead of the high-Q
sections (R. Schaumann and M. E. Van Valkenburg, "Design of Analog Filters",
2001, sec. 6.2, from memory).  The gain of each stage is then chosen so that
no intermediate output peaks more than a margin above the filter's own output
level, the last stage with a free gain taking up whatever the earlier ones
leave (ibid., "dynamic range scaling").  Peaks are found on a logarithmic
frequency grid and refined by zooming twice on the largest sample.

``section_order="max_dynamic_range"`` chooses the order that maximizes the
dynamic range under the rule stated for cascade design by Schaumann and
Van Valkenburg (ch. 6, from memory): with every intermediate output scaled
to peak at the filter output's level (so that all stages reach their swing
at the same input), the best order is the one with the least output noise.
Each section is taken to add the same white noise at its input; the noise
at the output is then ``sum_k M(S_<k)^2 / M(all)^2 * int |T_{S_>=k}|^2 df``,
``S_<k`` the sections ahead of position ``k``, ``T_S`` the product of their
standard shapes and ``M(S) = max_f |T_S|``.  Each term depends only on the
*set* of sections after position ``k``, so the minimum over all ``n!``
orders is a shortest path over the ``2^n`` subsets (dynamic programming,
the formulation of E. Lueder for RC-active cascades, from memory), exact
for this objective.  With stages whose gains are fixed the scaling is not
available and the order is the same proxy.
"""

from __future__ import annotations

from typing import Callable

import numpy as np

from service.approximation.types import Section
from service.realization.errors import RealizationError
from service.realization.fit import standard_shape

SECTION_ORDERS = ("ascending_q", "descending_q", "given", "max_dynamic_range")

#: Most sections the dynamic-range order searches exactly (2^n subsets); beyond, ascending Q.
MAX_DP_SECTIONS = 10

#: Points per decade of the coarse peak-search grid, and decades beyond the section frequencies.
GRID_POINTS_PER_DECADE = 60
GRID_DECADES_BEYOND = 2.0


def order_sections(sections: list[Section], section_order: str) -> list[int]:
    """Indices of ``sections`` in cascade order.

    ``"ascending_q"`` (first-order sections count as Q = 0.5 and come first),
    ``"descending_q"``, ``"given"``, or ``"max_dynamic_range"`` (see the
    module notes; :func:`dynamic_range_order`); ties keep the given order.
    """
    if section_order not in SECTION_ORDERS:
        raise RealizationError(
            f"unknown section_order {section_order!r}: expected one of {', '.join(SECTION_ORDERS)}",
            field="section_order",
        )
    idx = list(range(len(sections)))
    if section_order == "given":
        return idx
    if section_order == "max_dynamic_range":
        if 1 < len(sections) <= MAX_DP_SECTIONS:
            return dynamic_range_order(sections)[0]
        section_order = "ascending_q"
    q = [0.5 if s.q is None else float(s.q) for s in sections]
    return sorted(idx, key=lambda i: q[i], reverse=(section_order == "descending_q"))


def order_noise(sections: list[Section], grid_hz: np.ndarray | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Per-subset terms of the dynamic-range objective.

    Returns
    -------
    cost : ndarray, shape (2^n,)
        ``M(all - S)^2 / M(all)^2 * int |T_S|^2 df`` for every subset ``S``
        (bit ``i`` of the index: section ``i``), Hz (relative noise power
        of a unit white source ahead of the sections of ``S``).
    peak : ndarray, shape (2^n,)
        ``M(S) = max_f |T_S(f)|`` on the grid.
    """
    n = len(sections)
    grid = analysis_grid(sections) if grid_hz is None else np.asarray(grid_hz, dtype=float)
    s = 2j * np.pi * grid
    mag2 = np.array([np.abs(standard_shape(sec, s, sec.f0_hz, sec.q, sec.fz_hz)) ** 2 for sec in sections])
    prod = np.ones((1 << n, grid.size))
    for mask in range(1, 1 << n):
        low = mask & -mask
        prod[mask] = prod[mask ^ low] * mag2[low.bit_length() - 1]
    peak = np.sqrt(prod.max(axis=1))
    lnf = np.log(grid)
    y = prod * grid[None, :]
    power = np.sum(0.5 * (y[:, 1:] + y[:, :-1]) * np.diff(lnf)[None, :], axis=1)     # trapezoid in ln f
    full = (1 << n) - 1
    comp = full ^ np.arange(1 << n)
    cost = (peak[comp] / peak[full]) ** 2 * power
    return cost, peak


def dynamic_range_order(sections: list[Section], grid_hz: np.ndarray | None = None) -> tuple[list[int], float]:
    """The order of least output noise with equal intermediate peaks (module notes), by dynamic programming.

    Returns
    -------
    order : list of int
        Indices of ``sections``, first stage first.
    noise : float
        The objective of that order (relative noise power, Hz).
    """
    n = len(sections)
    cost, _ = order_noise(sections, grid_hz)
    size = 1 << n
    best = np.full(size, np.inf)
    first = np.full(size, -1, dtype=int)       # the section placed first among the set
    for mask in sorted(range(1, size), key=lambda m: bin(m).count("1")):
        if mask & (mask - 1) == 0:
            best[mask] = cost[mask]
            first[mask] = mask.bit_length() - 1
            continue
        m, i = mask, 0
        cand, pick = np.inf, -1
        while m:
            if m & 1:
                v = best[mask ^ (1 << i)]
                if v < cand - 1e-12 * abs(cand) or (pick < 0):
                    cand, pick = v, i
            m >>= 1
            i += 1
        best[mask] = cost[mask] + cand
        first[mask] = pick
    order, mask = [], size - 1
    while mask:
        i = int(first[mask])
        order.append(i)
        mask ^= 1 << i
    return order, float(best[size - 1])


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
    k = np.argmax(mag, axis=1)
    peak = mag[np.arange(mag.shape[0]), k]
    fpk = grid_hz[k]
    step = np.log(grid_hz[1] / grid_hz[0]) if grid_hz.size > 1 else 0.01
    for _ in range(zooms):
        # One fine grid per curve, evaluated for every curve (K is small).
        offs = np.linspace(-step, step, points)
        fine = (fpk[:, None] * np.exp(offs)[None, :])            # (K, P)
        m = magnitude(fine.ravel()).reshape(mag.shape[0], fpk.size, points)
        own = m[np.arange(fpk.size), np.arange(fpk.size), :]       # (K, P)
        j = np.argmax(own, axis=1)
        cand = own[np.arange(fpk.size), j]
        better = cand > peak
        peak = np.where(better, cand, peak)
        fpk = np.where(better, fine[np.arange(fpk.size), j], fpk)
        step = step * 2 / (points - 1)
    return peak, fpk


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
