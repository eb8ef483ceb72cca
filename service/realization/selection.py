"""Choose buildable part values for one stage.

Capacitors are the scarcer choice (fewer values, wider tolerances), so the
free capacitors of a topology are searched over the allowed capacitor values
and every other part is computed from them by the topology's design equations
and then snapped to the allowed values of its kind -- the usual order of work
for active-RC sections (R. Schaumann and M. E. Van Valkenburg, "Design of
Analog Filters", 2001, sec. 5.4; "choose the capacitors, compute the
resistors").  All candidate combinations are built as arrays and evaluated at
once through :meth:`Topology.design` and :meth:`Topology.achieved`.

The score of a candidate is the worst of ``|df0/f0|`` and ``|dQ/Q|`` after
snapping, plus a small gain-error term and an impedance term
``w * mean|log10(R / R_ref)|`` that steers resistors toward the preferred
level (a tie-break when no level is asked for).  A candidate with a part
outside its allowed range is dropped; only when every candidate has one does
the search keep the least-outside candidate and say so.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from service.approximation.types import Section
from service.components import snap_to_series
from service.deadline import check as check_deadline
from service.realization.errors import InfeasibleStage, RealizationError
from service.realization.parts import Allowed

#: Most candidate combinations evaluated for one stage.
MAX_COMBINATIONS = 700
#: Most combinations when the first window has no candidate with every part in range.
MAX_COMBINATIONS_WIDE = 20000
#: Impedance-term weight per decade: with and without an asked-for level.
IMPEDANCE_WEIGHT_ASKED = 5e-3
IMPEDANCE_WEIGHT_TIEBREAK = 2e-4
#: Gain-error weight in the score (f0 and Q dominate).
GAIN_WEIGHT = 0.1
#: Resistor level used when the caller gives none (ohm).
DEFAULT_R_REF_OHM = 10e3


@dataclass
class Selection:
    """Chosen values of one stage.

    Attributes
    ----------
    values : dict of str to float
        Role -> chosen value (ohm or F).
    ideal : dict of str to float
        Role -> value the design equations ask for with the chosen free parts.
    in_range : dict of str to bool
        Role -> whether the chosen value lies in the caller's allowed range.
    index : dict of str to int or None
        Role -> index in the kind's :class:`Allowed` values (None when the
        value is not one of them: exact values, or series values outside range).
    predicted : dict
        ``f0_hz``, ``q``, ``gain`` by the topology's closed form with the chosen values.
    score : float
    """

    values: dict
    ideal: dict
    in_range: dict
    index: dict
    predicted: dict
    score: float
    r_ref_ohm: float = DEFAULT_R_REF_OHM


def _window(allowed: Allowed, center: float, width: int) -> np.ndarray:
    """Up to ``width`` allowed values nearest ``center`` on a log scale, ascending."""
    v = allowed.values
    if v.size <= width:
        return v
    i = int(np.argmin(np.abs(np.log(v / center))))
    lo = max(0, min(i - width // 2, v.size - width))
    return v[lo:lo + width]


def _snap(allowed: Allowed, ideal: np.ndarray, exact: bool) -> tuple[np.ndarray, np.ndarray]:
    """Snapped values (nearest allowed value by ratio) and an in-range mask.

    NaN ideals give NaN and False.  A value counts as in range when it lies
    within half a step (by ratio) of the allowed list's ends.
    """
    if ideal.size > 1 and ideal[0] == ideal[-1] and np.all(ideal == ideal[0]):
        # A part only a ratio fixes has the same value in every candidate: snap it once.
        one, rng = _snap(allowed, ideal[:1], exact)
        return np.broadcast_to(one, ideal.shape), np.broadcast_to(rng, ideal.shape)
    finite = np.isfinite(ideal) & (ideal > 0)
    safe = np.where(finite, ideal, 1.0)
    v = allowed.values
    if exact:
        in_range = finite & (safe >= allowed.low * (1 - 1e-9)) & (safe <= allowed.high * (1 + 1e-9))
        return np.where(finite, safe, np.nan), in_range
    logv = allowed.log_values
    x = np.log(safe)
    hi = np.clip(np.searchsorted(logv, x), 1, max(v.size - 1, 1)) if v.size > 1 else np.zeros(x.shape, int)
    if v.size > 1:
        lo = hi - 1
        idx = np.where(x - logv[lo] <= logv[hi] - x, lo, hi)
    else:
        idx = hi
    snapped = v[idx]
    lo_gap = 0.5 * (logv[1] - logv[0]) if v.size > 1 else np.log(1.05)
    hi_gap = 0.5 * (logv[-1] - logv[-2]) if v.size > 1 else np.log(1.05)
    in_range = finite & (x >= logv[0] - lo_gap) & (x <= logv[-1] + hi_gap)
    return np.where(finite, snapped, np.nan), in_range


def _candidates(topology, section, strategy, allowed, free, fixed, specs, r_ref, exact, width):
    """Every candidate of one resistor level: chosen values, ideal values, in-range mask, r_ref."""
    if free:
        w0 = 2 * np.pi * section.f0_hz
        axes = []
        for p in free:
            center = 1.0 / (w0 * r_ref) if p.kind == "capacitor" else r_ref
            axes.append(_window(allowed[p.kind], center, width))
        grids = np.meshgrid(*axes, indexing="ij")
        free_values = {p.role: g.ravel() for p, g in zip(free, grids)}
        n = free_values[free[0].role].size
    else:
        free_values, n = {}, 1
    with np.errstate(all="ignore"):
        ideal = topology.design(section, strategy, free_values, r_ref_ohm=r_ref)
    ideal = {k: np.broadcast_to(np.asarray(v, dtype=float), (n,)) for k, v in ideal.items()}
    missing = [p.role for p in specs if p.role not in ideal]
    if missing:
        raise RealizationError(f"the {topology.name} design equations gave no value for {', '.join(missing)}",
                               field="topology")
    chosen, in_range = {}, {}
    for p in free:
        chosen[p.role] = free_values[p.role]
        in_range[p.role] = np.ones(n, dtype=bool)
    for p in fixed:
        chosen[p.role], in_range[p.role] = _snap(allowed[p.kind], ideal[p.role], exact)
    return chosen, ideal, in_range, np.full(n, r_ref)


def _concat(parts):
    keys = parts[0][0].keys()
    chosen = {k: np.concatenate([c[0][k] for c in parts]) for k in keys}
    ideal = {k: np.concatenate([c[1][k] for c in parts]) for k in parts[0][1].keys()}
    in_range = {k: np.concatenate([c[2][k] for c in parts]) for k in keys}
    return chosen, ideal, in_range, np.concatenate([c[3] for c in parts])


#: Resistor levels tried, rung by rung (multiples of the preferred level), when the
#: preferred one leaves some part outside its range; the search stops at the first
#: rung that brings every part in.
LEVEL_LADDER = ((0.5, 2.0), (0.2, 5.0), (0.1, 10.0), (0.05, 20.0))


def select_values(topology, section: Section, strategy: str, allowed: dict[str, Allowed], *,
                  exact: bool = False, impedance_ohm: float | None = None,
                  field: str = "design") -> Selection:
    """Search the free parts of one stage and snap the rest.

    Parameters
    ----------
    topology : Topology
        The stage's topology (see ``service.realization.topologies.base``).
    section : Section
        Target section, its ``gain`` the stage gain.
    strategy : str
        One of ``topology.strategies(section)``.
    allowed : dict
        ``"resistor"`` / ``"capacitor"`` -> :class:`Allowed`.
    exact : bool
        Keep the computed values unsnapped (free parts still come from ``allowed``).
    impedance_ohm : float or None
        Preferred resistor level (ohm); steers the search.
    field : str
        Public field path for errors.

    Returns
    -------
    Selection

    Notes
    -----
    Resistors that only a ratio fixes are set at the preferred level
    (``impedance_ohm``, else 10 kohm).  When that leaves some part outside its
    range for every capacitor choice, the levels of :data:`LEVEL_LADDER`
    (within the resistor range) are searched as well, all at once.

    Raises
    ------
    InfeasibleStage
        When the design equations give no usable candidate at all.
    """
    check_deadline("realization.selection")
    r_pref = float(impedance_ohm) if impedance_ohm else DEFAULT_R_REF_OHM
    weight = IMPEDANCE_WEIGHT_ASKED if impedance_ohm else IMPEDANCE_WEIGHT_TIEBREAK
    specs = topology.parts(section, strategy)
    free = [p for p in specs if p.free]
    fixed = [p for p in specs if not p.free]
    for p in specs:
        if p.kind not in allowed:
            raise RealizationError(f"the {topology.name} topology needs a {p.kind}, which no policy describes",
                                   field="parts")
    width = max(2, int(MAX_COMBINATIONS ** (1.0 / len(free)))) if free else 1

    def in_all(rng):
        return np.logical_and.reduce([rng[p.role] for p in specs])

    cand = _candidates(topology, section, strategy, allowed, free, fixed, specs, r_pref, exact, width)
    def finite_any(c):
        return np.logical_and.reduce([np.isfinite(c[1][p.role]) for p in specs]).any()

    if not finite_any(cand) and free:
        # Strategies with a ratio limit (a unity-gain Sallen-Key needs C1/C2 >= 4 Q^2)
        # may need capacitors far apart: widen the window to every allowed value.
        wide = max(2, int(MAX_COMBINATIONS_WIDE ** (1.0 / len(free))))
        if wide > width:
            width = wide
            cand = _candidates(topology, section, strategy, allowed, free, fixed, specs, r_pref, exact, width)
    if not in_all(cand[2]).any() and "resistor" in allowed:
        ra = allowed["resistor"]
        tried = [cand]
        for rung in LEVEL_LADDER:
            levels = [r_pref * m for m in rung if ra.low <= r_pref * m <= ra.high]
            tried += [_candidates(topology, section, strategy, allowed, free, fixed, specs, lv, exact, width)
                      for lv in levels]
            if any(in_all(c[2]).any() for c in tried[-len(levels):]) if levels else False:
                break
        cand = _concat(tried)
    chosen, ideal, in_range, levels_used = cand
    n = levels_used.size
    all_in = in_all(in_range)
    finite = np.logical_and.reduce([np.isfinite(chosen[p.role]) for p in specs])

    if not finite.any():
        raise InfeasibleStage(
            f"the {topology.name} topology ({strategy}) cannot realize the {section.kind.value} section "
            f"at f0 = {section.f0_hz:g} Hz, Q = {section.q} with gain {section.gain:g} from the allowed parts",
            field=field,
        )

    if not all_in.any():
        # Every candidate pushes some part outside its range: re-snap those to the
        # whole series (stock values stay as they are) and rank by how far out they are.
        for p in fixed:
            a = allowed[p.kind]
            if a.series is not None and not exact:
                ideal_p = ideal[p.role]
                ok = np.isfinite(ideal_p) & (ideal_p > 0)
                chosen[p.role] = np.where(ok, snap_to_series(np.where(ok, ideal_p, 1.0), a.series), np.nan)

    score = _score(topology, section, strategy, chosen, specs, r_pref, weight, n)
    if not all_in.any():
        excess = np.zeros(n)
        for p in specs:
            a = allowed[p.kind]
            v = np.where(np.isfinite(chosen[p.role]), chosen[p.role], 1.0)
            excess += np.maximum(0.0, np.log10(a.low / v)) + np.maximum(0.0, np.log10(v / a.high))
        score = score + excess
    else:
        score = np.where(all_in, score, np.inf)
    score = np.where(finite, score, np.inf)
    if not np.isfinite(score).any():
        raise InfeasibleStage(
            f"the {topology.name} topology ({strategy}) gives no candidate with finite f0 and Q for the "
            f"{section.kind.value} section at f0 = {section.f0_hz:g} Hz",
            field=field,
        )
    best = int(np.argmin(score))
    values = {p.role: float(chosen[p.role][best]) for p in specs}
    with np.errstate(all="ignore"):
        predicted = topology.achieved(section, strategy, {k: np.array([v]) for k, v in values.items()})
    predicted = {k: float(np.asarray(v).ravel()[0]) for k, v in predicted.items()}
    index, rng = {}, {}
    for p in specs:
        a = allowed[p.kind]
        v = values[p.role]
        i = int(a.index_of(np.array([v]))[0])
        index[p.role] = i if np.isclose(a.values[i], v, rtol=1e-9, atol=0.0) else None
        rng[p.role] = bool(a.low * (1 - 1e-9) <= v <= a.high * (1 + 1e-9))
    return Selection(
        values=values,
        ideal={p.role: float(ideal[p.role][best]) for p in specs},
        in_range=rng,
        index=index,
        predicted=predicted,
        score=float(score[best]),
        r_ref_ohm=float(levels_used[best]),
    )


def _score(topology, section, strategy, chosen, specs, r_ref, weight, n) -> np.ndarray:
    safe = {k: np.where(np.isfinite(v), v, 1.0) for k, v in chosen.items()}
    with np.errstate(all="ignore"):
        ach = topology.achieved(section, strategy, safe)
    f0 = np.broadcast_to(np.asarray(ach["f0_hz"], dtype=float), (n,))
    err = np.abs(f0 / section.f0_hz - 1)
    if section.order == 2 and section.q:
        q = np.broadcast_to(np.asarray(ach["q"], dtype=float), (n,))
        err = np.maximum(err, np.abs(q / section.q - 1))
    fz = ach.get("fz_hz")
    if fz is not None and section.fz_hz:
        fz = np.broadcast_to(np.asarray(fz, dtype=float), (n,))
        err = np.maximum(err, np.abs(fz / section.fz_hz - 1))
    if section.gain:
        g = np.broadcast_to(np.asarray(ach["gain"], dtype=float), (n,))
        err = err + GAIN_WEIGHT * np.abs(g / section.gain - 1)
    rs = [p.role for p in specs if p.kind == "resistor"]
    if rs:
        level = np.mean([np.abs(np.log10(safe[r] / r_ref)) for r in rs], axis=0)
        err = err + weight * level
    return np.where(np.isfinite(err), err, np.inf)
