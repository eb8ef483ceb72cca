"""Section order and gain distribution of a cascade of op-amp stages.

Sections are cascaded in ascending Q by default, the order that keeps the
signal level at the intermediate outputs lowest ahead of the high-Q
sections (R. Schaumann and M. E. Van Valkenburg, "Design of Analog Filters",
2001, sec. 6.2, from memory).  The gain of each stage is then chosen so that
no intermediate output peaks more than a margin above the filter's own output
level, the last stage with a free gain taking up whatever the earlier ones
leave (ibid., "dynamic range scaling"); where fixed-gain stages ahead fall
short of the filter's gain, a free stage makes up as much of the shortfall as
keeps its output at the filter's output level, so that the last one is not
left a large gain (a high-Q stage asked for a gain of 200 cannot be built from
a short stock list, and needs a faster op-amp).  Peaks are found on a logarithmic
frequency grid and refined by zooming twice on the largest sample.

``section_order="max_dynamic_range"`` chooses the order of the largest
dynamic range, the criterion of cascade design stated by Schaumann and Van
Valkenburg (ch. 6, from memory): the ratio of the largest output before any
intermediate output reaches the swing to the output noise.  For a candidate
order the stage gains are those :func:`distribute_gains` would give it (so the
estimate sees the same gains the design will have); the clipping term is
``max_k P_k / P_n``, ``P_k`` the peak of ``|prod_{j<=k} g_j T_j(f)|`` on the
analysis grid (``T_j`` the standard shapes), and for a stage whose topology has
op-amps ahead of its output (state-variable, Tow-Thomas) also the peak of
``|prod_{j<k} g_j T_j * T_k|``: those internal outputs carry the section's
shape before the stage's gain is applied; the noise term is the output
noise of a unit white source at the input and at the output of every stage,
``sum_k int (|prod_{j>=k} g_j T_j|^2 + |prod_{j>k} g_j T_j|^2) df`` (the
resistors' noise enters a stage ahead of its shaping, the op-amp's at its
output).  The estimate is maximized over all ``n!`` orders up to
:data:`EXHAUSTIVE_SECTIONS` sections, beyond that by swapping neighbours from
the ascending-Q order until no swap improves it.  It is an estimate: the
realized circuit's noise and levels are measured afterwards by the noise and
headroom analyses.
"""

from __future__ import annotations

from typing import Callable

import numpy as np

from service.approximation.enums import SectionOrder
from service.approximation.types import Section
from service.realization.errors import RealizationError
from service.realization.fit import standard_shape

SECTION_ORDERS = tuple(o.value for o in SectionOrder)

#: Most sections whose every order the dynamic-range search evaluates; beyond, neighbour swaps.
EXHAUSTIVE_SECTIONS = 6

#: Points per decade of the coarse peak-search grid, and decades beyond the section frequencies.
GRID_POINTS_PER_DECADE = 60
GRID_DECADES_BEYOND = 2.0
#: Coarse local maxima of each curve refined by zooming.
PEAK_CANDIDATES = 3


def order_sections(sections: list[Section], section_order: str, *,
                   freedoms: list[tuple[str, float]] | None = None, margin_db: float = 1.0,
                   internal: list[bool] | None = None) -> list[int]:
    """Indices of ``sections`` in cascade order.

    ``"ascending_q"`` (first-order sections count as Q = 0.5 and come first),
    ``"descending_q"``, ``"as_computed"`` (the given order), or ``"max_dynamic_range"`` (see the
    module notes; :func:`dynamic_range_order`, with the sections' gain
    ``freedoms`` (:func:`gain_freedom`, in the given order; default all
    fixed at their gains), the stage peak ``margin_db`` and which sections'
    topologies have ``internal`` op-amps); ties keep the given order.
    """
    section_order = getattr(section_order, "value", section_order)
    if section_order not in SECTION_ORDERS:
        raise RealizationError(
            f"unknown section_order {section_order!r}: expected one of {', '.join(SECTION_ORDERS)}",
            field="section_order",
        )
    idx = list(range(len(sections)))
    if section_order == "as_computed":
        return idx
    if section_order == "max_dynamic_range":
        if len(sections) < 2:
            return idx
        return dynamic_range_order(sections, freedoms, margin_db, internal)[0]
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


def section_shapes(sections: list[Section], grid_hz: np.ndarray | None = None) -> np.ndarray:
    """``|T_j(f)|`` of each section's standard shape (gain 1) on the analysis grid, shape (n, F)."""
    grid = analysis_grid(sections) if grid_hz is None else grid_hz
    s = 2j * np.pi * grid
    return np.array([np.abs(standard_shape(sec, s, sec.f0_hz, sec.q, sec.fz_hz)) for sec in sections])


def _magnitudes(shapes: np.ndarray, sections, freedoms, total_gain: float, margin_db: float):
    """Gain magnitudes of :func:`distribute_gains` from precomputed shapes (n, F) in cascade order."""
    n = len(sections)
    level = abs(total_gain) * float(np.max(np.prod(shapes, axis=0)))
    limit = level * 10 ** (margin_db / 20)
    free = [i for i in range(n) if freedoms[i][0] != "fixed"]
    absorber = free[-1] if free else None
    mags = [0.0] * n
    for i in range(n):
        mode, val = freedoms[i]
        if mode == "fixed":
            mags[i] = abs(val)
    cum = np.ones(shapes.shape[1])
    for i in range(n):
        mode, val = freedoms[i]
        if i == absorber:
            others = np.prod([mags[j] for j in range(n) if j != i]) if n > 1 else 1.0
            mags[i] = abs(total_gain) / others if others > 0 else 1.0
        elif mode != "fixed":
            g = abs(sections[i].gain)
            pk = float(np.max(cum * shapes[i]))
            if i < n - 1 and pk > 0:
                # The gain that leaves every later stage at its own (or imposed) gain: when the stages so far
                # fall short of the filter's gain (fixed attenuating stages), this stage makes up what it can
                # while its output stays at the filter's output level, instead of leaving it all to the last.
                later = [abs(freedoms[j][1]) if freedoms[j][0] == "fixed" else abs(sections[j].gain)
                         for j in range(i + 1, n)]
                rest = float(np.prod(mags[:i])) * float(np.prod(later))
                need = abs(total_gain) / rest if rest > 0 else g
                if need > g:
                    g = min(need, max(g, level / pk))
                if g * pk > limit:
                    g = level / pk
            mags[i] = g
        cum = cum * shapes[i] * mags[i]
    return mags, level, absorber


def order_figure(shapes: np.ndarray, sections, freedoms, total_gain: float, margin_db: float,
                 lnf_weights: np.ndarray, internal=None) -> float:
    """The dynamic-range estimate of one order (module notes), dB up to a constant; larger is better.

    ``shapes``, ``sections``, ``freedoms`` and ``internal`` (bool per stage: op-amps ahead of its output)
    are in the candidate's cascade order; ``lnf_weights`` (F,) integrates a density over the grid
    (``int S df = sum S * w``).
    """
    mags, _, _ = _magnitudes(shapes, sections, freedoms, total_gain, margin_db)
    staged = shapes * np.asarray(mags)[:, None]
    prefix = np.cumprod(staged, axis=0)
    peaks = prefix.max(axis=1)
    if peaks[-1] <= 0:
        return -np.inf
    top = float(peaks.max())
    if internal is not None and any(internal):
        ahead = np.vstack([np.ones((1, shapes.shape[1])), prefix[:-1]])
        inner = (ahead * shapes).max(axis=1)
        top = max(top, float(np.max(np.where(np.asarray(internal, dtype=bool), inner, 0.0))))
    clip = top / float(peaks[-1])
    suffix = np.cumprod(staged[::-1], axis=0)[::-1]                    # prod_{j>=k}
    after = np.vstack([suffix[1:], np.ones((1, shapes.shape[1]))])     # prod_{j>k}
    noise = float(np.sum((suffix ** 2 + after ** 2) @ lnf_weights))
    return -20 * np.log10(clip) - 10 * np.log10(noise)


def dynamic_range_order(sections: list[Section], freedoms: list[tuple[str, float]] | None = None,
                        margin_db: float = 1.0, internal: list[bool] | None = None) -> tuple[list[int], float]:
    """The order of the largest dynamic-range estimate (module notes).

    Parameters
    ----------
    sections : list of Section
    freedoms : list of (mode, value), optional
        :func:`gain_freedom` of each section, in the given order; default:
        every gain fixed at the section's gain.
    margin_db : float
        Stage peak margin of :func:`distribute_gains`, dB.
    internal : list of bool, optional
        Whether each section's topology has op-amps ahead of its output
        (in the given order; default none).

    Returns
    -------
    order : list of int
        Indices of ``sections``, first stage first.
    figure_db : float
        Its estimate, dB (relative: only differences between orders mean anything).
    """
    n = len(sections)
    if freedoms is None:
        freedoms = [("fixed", float(sec.gain)) for sec in sections]
    if len(freedoms) != n:
        raise RealizationError("freedoms must give one entry per section", field="section_order")
    grid = analysis_grid(sections)
    shapes = section_shapes(sections, grid)
    total = float(np.prod([sec.gain for sec in sections]))
    lnf = np.log(grid)
    w = np.zeros_like(grid)
    d = np.diff(lnf) / 2
    w[:-1] += d * grid[:-1]
    w[1:] += d * grid[1:]

    def figure(order) -> float:
        order = list(order)
        return order_figure(shapes[order], [sections[i] for i in order], [freedoms[i] for i in order], total,
                            margin_db, w, None if internal is None else [internal[i] for i in order])

    if n <= EXHAUSTIVE_SECTIONS:
        import itertools
        best, best_fig = None, -np.inf
        for perm in itertools.permutations(range(n)):
            fig = figure(perm)
            if fig > best_fig + 1e-9:
                best, best_fig = list(perm), fig
        return best, float(best_fig)
    order = order_sections(sections, "ascending_q")
    fig = figure(order)
    improved = True
    while improved:
        improved = False
        for k in range(n - 1):
            cand = order[:k] + [order[k + 1], order[k]] + order[k + 2:]
            f2 = figure(cand)
            if f2 > fig + 1e-9:
                order, fig, improved = cand, f2, True
    return order, float(fig)


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
    mags, level, absorber = _magnitudes(section_shapes(sections), sections, freedoms, total_gain, margin_db)
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
