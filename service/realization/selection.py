"""Choose buildable part values for one stage: a joint search of capacitors and their dependent parts.

Capacitors are the scarcer choice (fewer values, wider tolerances), so the
free capacitors of a topology are searched over the allowed capacitor values
and every other part is computed from them by the topology's design equations
-- the usual order of work for active-RC sections (R. Schaumann and
M. E. Van Valkenburg, "Design of Analog Filters", 2001, sec. 5.4; "choose the
capacitors, compute the resistors").  Snapping each computed part to its
nearest allowed value on its own leaves errors that add up (two resistors
5 % off in the same direction move f0 by 5 %); so the search is joint:

1. Every combination of free capacitors in a window around the preferred
   impedance level is designed at once and its dependent parts snapped to
   their nearest allowed values; the best :data:`CAP_CANDIDATES_KEPT`
   capacitor choices (all parts in range) are kept.
2. For each kept choice, every dependent part (resistors and computed
   capacitors) takes each of its neighbouring allowed values (the two
   around its ideal value, or three -- the nearest and one on each side --
   when the stage has few such parts), and all combinations are evaluated
   at once (an index grid, no loop over combinations) by the topology's
   closed form.
3. With an op-amp, the closed-form figures are corrected per capacitor
   choice by the macromodel's own shift (circuit engine, one batched call),
   and the :data:`MODEL_CANDIDATES` best combinations are scored exactly with
   the macromodel (circuit engine, batched over the combinations): the
   choice is made on the figures the stage reaches with that op-amp.  The
   design equations are then asked for the predistorted section
   (:mod:`service.realization.predistortion`).

The score of a combination is the worst of ``Q_w |df0/f0|``, ``|dQ/Q|``,
``W_z |dfz/fz|`` and the notch depth the zero damping ``zeta_z`` leaves at fz
(relative to the DC gain, :func:`_depth_weight`), plus :data:`BEAM_TIE_WEIGHT`
times their mean (of two combinations equally far off in their worst figure,
the one nearer in the others wins), a small gain-error term and an impedance term ``w * mean|log10(R / R_ref)|``
that steers resistors toward the preferred level.  The weights follow the
response: near f0 a biquad's log-magnitude moves about ``Q`` times as much
as f0 does (``Q_w = max(1, Q)``), and a zero sets the stopband around it
several times more strongly than it moves, the more so the closer it is to
the pole frequency (``W_z = fz/|fz - f0|`` within 3 and 10; 10 for a notch);
the gain only scales the whole response.  A candidate with
a part outside its allowed range is dropped; only when every candidate has
one does the search keep the least-outside candidate and say so.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from service.approximation.types import Section, SectionKind
from service.deadline import check as check_deadline
from service.realization.errors import InfeasibleStage, RealizationError
from service.realization.parts import Allowed
from service.realization.predistortion import Predistortion, model_figures, predistort, target_gain

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
#: Capacitor choices kept for the joint search of their dependent parts.
CAP_CANDIDATES_KEPT = 16
#: Partial choices kept at each step of the beam search, per capacitor choice.
BEAM_WIDTH = 32
#: Partial choices kept besides those, per capacitor choice, by a one-step look-ahead (:func:`_beam`).
BEAM_LOOKAHEAD_WIDTH = 16
#: Allowed values tried for each part around its continuous best value.
BEAM_OPTIONS = 4
#: Decades beyond the allowed range a dependent part may go when no candidate keeps every part in range.
OUT_OF_RANGE_DECADES = 2.0
#: Score per decade a part lies outside its range (when no candidate keeps every part in).
EXCESS_WEIGHT = 0.1
#: Ridge (relative to the trace of J J^T) of the beam search's least-squares steps.
RIDGE = 1e-10
#: Farthest a part moves from its ideal value in the beam search, in steps of the coarsest list of values.
BEAM_REACH = 1.5
#: Weight of the largest move (log value) in the beam's ranking: among equally good choices,
#: the one nearer the ideal values (where the linearization is accurate) goes first.
BEAM_MOVE_WEIGHT = 0.01
#: Weight of the mean error beside the worst in the beam's ranking (and of the figures' summed errors
#: beside their largest in the score): among choices equally far off in their worst figure, the one
#: nearer in the others goes first.
BEAM_TIE_WEIGHT = 0.02
#: Combinations scored exactly with the op-amp macromodel.
MODEL_CANDIDATES = 24
#: Candidates a selection hands back, its choice included (:attr:`Selection.alternatives`): the first
#: :data:`ALTERNATIVES_BY_RANK` by rank, the others spread over the directions of the figures' errors
#: among those within :data:`ALTERNATIVES_POOL_FACTOR` times the chosen error plus
#: :data:`ALTERNATIVES_POOL_SLACK` (the best :data:`ALTERNATIVES_POOL_SIZE` of them).
ALTERNATIVES_KEPT = 24
ALTERNATIVES_BY_RANK = 8
ALTERNATIVES_POOL_FACTOR = 2.0
ALTERNATIVES_POOL_SLACK = 3e-3
ALTERNATIVES_POOL_SIZE = 256
#: Relative step (in log value) of the finite-difference sensitivities of the screen.
FD_STEP = 1e-5
#: Bounds of the weight of a zero-frequency error: a stopband's attenuation between two zeros moves
#: several times as much as the zeros do (common practice, no source).
ZERO_WEIGHT_MIN = 3.0
ZERO_WEIGHT_MAX = 10.0


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
        ``f0_hz``, ``q``, ``gain`` (and ``fz_hz``, ``zero_damping``) by the
        topology's closed form with the chosen values (ideal op-amp).
    score : float
    r_ref_ohm : float
        Level (ohm) of the ratio-only resistors of the chosen candidate.
    predicted_macromodel : dict or None
        The same figures with the op-amp macromodel (circuit engine); None without an op-amp.
    predistortion : Predistortion or None
        The section the design equations were asked for (None: the target itself).
    combinations : int
        Combinations the joint search evaluated.
    alternatives : dict of str to ndarray or None
        Role -> values (K,) of the best :data:`ALTERNATIVES_KEPT` candidates by the same score, the
        chosen one first: what a caller judging the whole filter (not the stage alone) may pick from.
    """

    values: dict
    ideal: dict
    in_range: dict
    index: dict
    predicted: dict
    score: float
    r_ref_ohm: float = DEFAULT_R_REF_OHM
    predicted_macromodel: dict | None = None
    predistortion: Predistortion | None = None
    combinations: int = 0
    alternatives: dict | None = None


def _window(allowed: Allowed, center: float, width: int, spread: bool = False) -> np.ndarray:
    """Up to ``width`` allowed values nearest ``center`` on a log scale, ascending; with ``spread``, ``width``
    values evenly spaced (by index, so by ratio in a series) over the whole allowed list instead."""
    v = allowed.values
    if v.size <= width:
        return v
    if spread:
        return v[np.unique(np.round(np.linspace(0, v.size - 1, width)).astype(int))]
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


def _candidates(topology, section, strategy, allowed, free, fixed, specs, r_ref, exact, width, spread=False):
    """Every candidate of one resistor level: chosen values, ideal values, in-range mask, r_ref."""
    if free:
        w0 = 2 * np.pi * section.f0_hz
        axes = []
        for p in free:
            center = 1.0 / (w0 * r_ref) if p.kind == "capacitor" else r_ref
            axes.append(_window(allowed[p.kind], center, width, spread))
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


def _cap_stage(topology, section, strategy, allowed, specs, free, fixed, r_pref, exact):
    """Step 1: every capacitor choice of the window (resistor levels laddered when needed), nearest-snapped.

    Returns ``(chosen, ideal, in_range, levels)``: dicts of arrays (N,) and the level (ohm) of each candidate.
    """
    width = max(2, int(MAX_COMBINATIONS ** (1.0 / len(free)))) if free else 1

    def in_all(rng):
        return np.logical_and.reduce([rng[p.role] for p in specs])

    cand = _candidates(topology, section, strategy, allowed, free, fixed, specs, r_pref, exact, width)

    def finite_any(c):
        return np.logical_and.reduce([np.isfinite(c[1][p.role]) for p in specs]).any()

    spread = False
    if not finite_any(cand) and free:
        # Strategies with a ratio limit (a unity-gain Sallen-Key needs C1/C2 >= 4 Q^2)
        # may need capacitors far apart: widen the window to the whole allowed list, spread evenly over it
        # (a dense series such as E96 has more values than fit; the dependent parts adapt to the choice).
        wide = max(2, int(MAX_COMBINATIONS_WIDE ** (1.0 / len(free))))
        if wide > width:
            width, spread = wide, True
            cand = _candidates(topology, section, strategy, allowed, free, fixed, specs, r_pref, exact, width,
                               spread)
    if not in_all(cand[2]).any() and "resistor" in allowed:
        ra = allowed["resistor"]
        tried = [cand]
        for rung in LEVEL_LADDER:
            levels = [r_pref * m for m in rung if ra.low <= r_pref * m <= ra.high]
            tried += [_candidates(topology, section, strategy, allowed, free, fixed, specs, lv, exact, width,
                                  spread) for lv in levels]
            if any(in_all(c[2]).any() for c in tried[-len(levels):]) if levels else False:
                break
        cand = _concat(tried)
    return cand


def _weights(section: Section) -> tuple[float, float]:
    """``(Q_w, W_z)``: weights of the f0 and fz errors (module docstring)."""
    qw = max(1.0, float(section.q)) if section.order == 2 and section.q else 1.0
    wz = ZERO_WEIGHT_MIN
    if section.fz_hz and section.kind in (SectionKind.LOWPASS_NOTCH, SectionKind.HIGHPASS_NOTCH):
        gap = abs(section.fz_hz - section.f0_hz)
        wz = min(ZERO_WEIGHT_MAX, section.fz_hz / gap) if gap > 0 else ZERO_WEIGHT_MAX
    elif section.kind == SectionKind.NOTCH:
        wz = ZERO_WEIGHT_MAX
    return qw, max(ZERO_WEIGHT_MIN, wz)


def _depth_weight(section: Section) -> float:
    """``2 / |1 - rho + j sqrt(rho)/Q|``: the notch depth at fz (relative to the DC gain) per unit of zero damping.

    With ``N = s^2 + 2 zeta wz s + wz^2`` the section's gain at ``s = j wz`` over its DC gain is
    ``2 zeta / |1 - rho + j sqrt(rho)/Q|``, ``rho = wz^2/w0^2`` (from the standard form).
    """
    rho = (float(section.fz_hz) / section.f0_hz) ** 2
    return 2.0 / abs(complex(1.0 - rho, math.sqrt(rho) / float(section.q)))


def _figure_error(section: Section, gain: float, figs: dict, n: int) -> np.ndarray:
    """The response-weighted figure error of every candidate, shape (n,) (module docstring)."""
    qw, wz = _weights(section)

    def col(key):
        return np.broadcast_to(np.asarray(figs[key], dtype=float), (n,))

    terms = [qw * np.abs(col("f0_hz") / section.f0_hz - 1)]
    if section.order == 2 and section.q:
        terms.append(np.abs(col("q") / section.q - 1))
    if figs.get("fz_hz") is not None and section.fz_hz:
        terms.append(wz * np.abs(col("fz_hz") / section.fz_hz - 1))
    if figs.get("zero_damping") is not None:
        terms.append(_depth_weight(section) * np.abs(col("zero_damping")))
    err = np.max(terms, axis=0) + BEAM_TIE_WEIGHT * np.mean(terms, axis=0)
    if gain:
        err = err + GAIN_WEIGHT * np.abs(col("gain") / gain - 1)
    return err


def _impedance(specs, values, r_ref, weight, n) -> np.ndarray:
    rs = [p.role for p in specs if p.kind == "resistor"]
    if not rs:
        return np.zeros(n)
    return weight * np.mean([np.abs(np.log10(values[r] / r_ref)) for r in rs], axis=0)


def _ideal_figures(topology, section, strategy, values, n) -> dict:
    safe = {k: np.where(np.isfinite(v), v, 1.0) for k, v in values.items()}
    with np.errstate(all="ignore"):
        ach = topology.achieved(section, strategy, safe)
    return {k: np.broadcast_to(np.asarray(v, dtype=float), (n,)) for k, v in ach.items()}


def _score(topology, design_section, target, strategy, values, specs, r_ref, weight, n) -> np.ndarray:
    """Closed-form score of every candidate (ideal op-amp): figures of ``values`` against ``design_section``."""
    figs = _ideal_figures(topology, design_section, strategy, values, n)
    err = _figure_error(design_section, target_gain(topology, design_section, strategy), figs, n)
    err = err + _impedance(specs, values, r_ref, weight, n)
    return np.where(np.isfinite(err), err, np.inf)


def _error_vector(target: Section, gain: float, figs: dict, n: int) -> np.ndarray:
    """Weighted log-errors of every candidate, shape (n, F): the coordinates the screen drives to zero.

    ``Q_w ln(f0/f0_t)``, ``ln(Q/Q_t)``, ``W_z ln(fz/fz_t)``, ``2 zeta_z``, ``GAIN_WEIGHT ln|g/g_t|``
    (those that apply); their largest magnitude approximates :func:`_figure_error`.
    """
    qw, wz = _weights(target)

    def col(key):
        return np.broadcast_to(np.asarray(figs[key], dtype=float), (n,))

    cols = [qw * np.log(np.abs(col("f0_hz") / target.f0_hz))]
    if target.order == 2 and target.q:
        cols.append(np.log(np.abs(col("q") / target.q)))
    if figs.get("fz_hz") is not None and target.fz_hz:
        cols.append(wz * np.log(np.abs(col("fz_hz") / target.fz_hz)))
    if figs.get("zero_damping") is not None:
        cols.append(_depth_weight(target) * col("zero_damping"))
    if gain:
        cols.append(GAIN_WEIGHT * np.log(np.abs(col("gain") / gain)))
    return np.stack(cols, axis=1)


def _screen(topology, design_section, target, strategy, allowed, specs, free, snapped, chosen, ideal, keep,
            gain_t, ratio):
    """Step 2: the dependent parts' allowed values around each kept capacitor choice, by a beam search.

    The weighted log-errors are linearized at the ideal values (central finite differences of the
    closed form, all kept choices at once) and :func:`_beam` picks, per choice, the
    :data:`BEAM_WIDTH` value combinations with the smallest linearized error; they are returned
    as full value arrays for the exact evaluation.

    Returns
    -------
    values : dict of str to ndarray, shape (L,)
    origin : ndarray of int, shape (L,)
        Index into ``keep`` of each combination.
    """
    k = keep.size
    m = len(snapped)
    base = {p.role: ideal[p.role][keep] for p in specs}
    for p in free:
        base[p.role] = chosen[p.role][keep]
    if m == 0:
        return base, np.arange(k)
    # central differences of the error vector in the log of each dependent part, all kept choices at once
    h = FD_STEP
    batch = {r: np.tile(v, 2 * m + 1) for r, v in base.items()}
    for i, p in enumerate(snapped):
        batch[p.role][(1 + 2 * i) * k:(2 + 2 * i) * k] *= np.exp(h)
        batch[p.role][(2 + 2 * i) * k:(3 + 2 * i) * k] *= np.exp(-h)
    figs = _ideal_figures(topology, design_section, strategy, batch, (2 * m + 1) * k)
    if ratio is not None:
        figs = _corrected(figs, {kk: np.tile(v, 2 * m + 1) for kk, v in ratio.items()})
    vec = _error_vector(target, gain_t, figs, (2 * m + 1) * k).reshape(2 * m + 1, k, -1)
    e0 = vec[0]                                                  # (K, F)
    jac = (vec[1::2] - vec[2::2]) / (2 * h)                      # (m, K, F)
    jac = np.where(np.isfinite(jac), jac, 0.0)
    lv = {p.role: allowed[p.kind].log_values for p in snapped}
    x0 = np.stack([np.log(base[p.role]) for p in snapped], axis=1)          # (K, m) ideal log values
    steps = np.array([float(np.median(np.diff(lv[p.role]))) if lv[p.role].size > 1 else 0.0 for p in snapped])
    order = np.argsort(-np.mean(np.max(np.abs(jac), axis=2), axis=1) * steps, kind="stable")
    chosen_ix = _beam(jac.transpose(1, 2, 0), e0, x0, [lv[snapped[i].role] for i in range(m)], order,
                      np.where(steps > 0, steps, np.log(1.1)))                                        # (K, B, m)
    b = chosen_ix.shape[1]
    origin = np.concatenate([np.repeat(np.arange(k), b), np.arange(k)])
    values = {p.role: chosen[p.role][keep][origin] for p in free}
    for i, p in enumerate(snapped):
        # the beam's choices, and each kept choice's nearest-snapped values
        values[p.role] = np.concatenate([allowed[p.kind].values[chosen_ix[:, :, i].ravel()], chosen[p.role][keep]])
    return values, origin


def _beam(jac: np.ndarray, e0: np.ndarray, x0: np.ndarray, logv: list, order: np.ndarray, steps: np.ndarray
          ) -> np.ndarray:
    """Allowed values of the dependent parts whose linearized figure error is smallest: a beam search.

    A sequential rounding in the manner of Babai's nearest-plane method (L. Babai, "On Lovasz'
    lattice reduction and the nearest lattice point problem", Combinatorica 6 (1986) 1-13, from
    memory), widened to a beam: the parts are fixed one at a time (largest leverage first); for
    each partial choice the parts still free are treated as continuous and the least-squares
    (minimum-norm) correction of their log values gives the value the next part should take;
    its :data:`BEAM_OPTIONS` allowed values around that value are tried, and the
    :data:`BEAM_WIDTH` partial choices whose error the remaining parts cannot absorb is smallest
    are kept, with :data:`BEAM_LOOKAHEAD_WIDTH` more ranked by a one-step look-ahead (the next part
    at its nearest allowed value, then what the parts after it cannot absorb): with a coarse series
    the last parts of a group that sets one figure (four resistors setting f0) round far off unless
    the earlier ones were chosen for it, which the plain residual, zero until then, cannot see -- the
    look-ahead is one step of a rollout (D. P. Bertsekas, J. N. Tsitsiklis, C. Wu, "Rollout
    algorithms for combinatorial optimization", Journal of Heuristics 3 (1997) 245-262, from
    memory).  All capacitor choices and beam entries are processed at once (batched matrices).

    Parameters
    ----------
    jac : ndarray, shape (K, F, m)
        Derivatives of the weighted log-errors with respect to the parts' log values.
    e0 : ndarray, shape (K, F)
        Weighted log-errors at the ideal values.
    x0 : ndarray, shape (K, m)
        Ideal log values.
    logv : list of ndarray
        Allowed log values of each part, ascending.
    order : ndarray of int, shape (m,)
        The order the parts are fixed in.
    steps : ndarray, shape (m,)
        Typical log step of each part's allowed values; a part moves at most
        :data:`BEAM_REACH` times the largest of them from its ideal value (the linearization
        holds near it, and a fine-series part can still make up for a coarse one).

    Returns
    -------
    ndarray of int, shape (K, B, m)
        Indices into each part's allowed values.
    """
    k, f, m = jac.shape
    beam_ix = np.zeros((k, 1, m), dtype=int)
    err = e0[:, None, :]                          # (K, B, F) error with the fixed parts' offsets
    max_step = float(np.max(steps))
    eye = np.eye(f)
    # Gram matrices J J^T (K, F, F) of the parts not yet fixed, from the last part backwards; the
    # minimum-norm least-squares step of a set of parts is J^T (J J^T)^-1 applied to the error,
    # with a tiny ridge where the remaining parts cannot move some figure (rank-deficient J).
    cols = jac[:, :, order]                                              # (K, F, m) in fixing order
    outer = cols[:, :, None, :] * cols[:, None, :, :]                    # (K, F, F, m)
    gram = np.cumsum(outer[..., ::-1], axis=-1)[..., ::-1]               # gram[..., t]: parts t.. m-1
    scale = np.trace(gram[..., 0], axis1=1, axis2=2)[:, None, None] + 1e-300
    ridge = RIDGE * scale * eye

    def inv(t):
        return np.linalg.inv(gram[..., t] + ridge) if t < m else np.zeros((k, f, f))

    invs = [inv(t) for t in range(m + 1)]
    reach = BEAM_REACH * max_step
    shifts = np.arange(-(BEAM_OPTIONS // 2) + 1, BEAM_OPTIONS // 2 + 1)
    rows = np.arange(k)[:, None]
    moved_so_far = np.zeros((k, 1))

    def unabsorbed(e, t):
        """What the parts from the t-th (in fixing order) on cannot absorb of errors ``e`` (K, N, F)."""
        if t >= m:
            return e
        comp = eye - gram[..., t] @ invs[t]
        return e @ comp.transpose(0, 2, 1)

    for t, p in enumerate(order):
        last = t == m - 1
        jp = jac[:, :, p]                                                # (K, F)
        row = (jp[:, None, :] @ invs[t])[:, 0, :]                       # (K, F): p's row of J^T (J J^T)^-1
        xp = x0[:, p][:, None]
        target = xp - np.einsum("kbf,kf->kb", err, row)                  # continuous value of part p, (K, B)
        target = np.minimum(np.maximum(target, xp - reach), xp + reach)
        lv = logv[p]
        top = lv.size - 1
        lo = np.minimum(np.maximum(np.searchsorted(lv, target, side="right") - 1, 0), top)
        opts = np.minimum(np.maximum(lo[..., None] + shifts, 0), top)   # (K, B, O)
        d = lv[opts] - xp[:, :, None]                                    # (K, B, O)
        new_err = err[:, :, None, :] + d[..., None] * jp[:, None, None, :]      # (K, B, O, F)
        bsz, o = d.shape[1], d.shape[2]
        flat_err = new_err.reshape(k, bsz * o, f)
        if not last:
            # one step of look-ahead: the next part at the allowed value nearest its least-squares value,
            # and what the parts after it cannot absorb then.  Without it every partial choice the later
            # parts can absorb ties at zero, and the beam keeps those nearest the ideal values, whose
            # rounding of the last parts is left to chance.
            q = order[t + 1]
            jq = jac[:, :, q]
            row_q = (jq[:, None, :] @ invs[t + 1])[:, 0, :]
            xq = x0[:, q][:, None]
            tq = xq - np.einsum("knf,kf->kn", flat_err, row_q)
            tq = np.minimum(np.maximum(tq, xq - reach), xq + reach)
            lq = logv[q]
            hi_q = np.minimum(np.searchsorted(lq, tq), lq.size - 1)
            lo_q = np.maximum(hi_q - 1, 0)
            near = np.where(np.abs(lq[lo_q] - tq) <= np.abs(lq[hi_q] - tq), lo_q, hi_q)
            ahead = flat_err + (lq[near] - xq)[..., None] * jq[:, None, :]
            resid = np.abs(unabsorbed(flat_err, t + 1))
            look = np.maximum(resid, np.abs(unabsorbed(ahead, t + 2)))
        else:
            resid = look = np.abs(flat_err)
        moved = np.maximum(moved_so_far[:, :, None], np.abs(d)).reshape(k, bsz * o)

        def ranked(r):
            return np.argsort(np.max(r, axis=-1) + BEAM_TIE_WEIGHT * np.mean(r, axis=-1)
                              + BEAM_MOVE_WEIGHT * moved, axis=1, kind="stable")
        width = min(BEAM_WIDTH, bsz * o)
        if last:
            pick = ranked(resid)[:, :width]                              # (K, W)
        else:
            # the beam by what the later parts cannot absorb, and as many again (those not already in)
            # by the look-ahead
            plain, ahead_order = ranked(resid), ranked(look)
            half = plain[:, :width]
            width = min(width + BEAM_LOOKAHEAD_WIDTH, bsz * o)
            taken = np.zeros((k, bsz * o), dtype=bool)
            taken[rows, half] = True
            fresh = np.argsort(taken[rows, ahead_order], axis=1, kind="stable")[:, :width - half.shape[1]]
            pick = np.concatenate([half, ahead_order[rows, fresh]], axis=1)
        pb, po = pick // o, pick % o
        beam_ix = beam_ix[rows, pb]
        beam_ix[:, :, p] = opts[rows, pb, po]
        moved_so_far = moved[rows, pick]
        err = new_err[rows, pb, po]
    return beam_ix


def _corrected(figs: dict, ratio: dict) -> dict:
    """Closed-form figures times the macromodel's ratio (zero damping: plus its difference)."""
    out = {}
    for key, v in figs.items():
        if key not in ratio:
            continue
        out[key] = v + ratio[key] if key == "zero_damping" else v * ratio[key]
    return out


def select_values(topology, section: Section, strategy: str, allowed: dict[str, Allowed], *,
                  exact: bool = False, impedance_ohm: float | None = None,
                  field: str = "design", opamp_model=None) -> Selection:
    """Search the free parts of one stage and their dependent parts jointly.

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
    opamp_model : service.circuit.OpAmpModel or None
        The op-amp every position uses (single-pole macromodel); None: ideal
        op-amps.  Given, the stage is predistorted for it and the choice is
        scored with it (module docstring).

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

    def in_all(rng):
        return np.logical_and.reduce([rng[p.role] for p in specs])

    design_section, pre = section, None
    if opamp_model is not None:
        # Predistort for a representative capacitor choice: the best of a closed-form search.
        chosen, ideal, in_range, levels = _cap_stage(topology, section, strategy, allowed, specs, free, fixed,
                                                     r_pref, exact)
        sc = _score(topology, section, section, strategy, chosen, specs, levels, weight, levels.size)
        sc = np.where(in_all(in_range) | ~in_all(in_range).any(), sc, np.inf)
        if np.isfinite(sc).any():
            b = int(np.argmin(sc))
            pre = predistort(topology, section, strategy, {p.role: chosen[p.role][b] for p in free}, opamp_model,
                             r_ref_ohm=float(levels[b]))
            design_section = pre.section

    chosen, ideal, in_range, levels = _cap_stage(topology, design_section, strategy, allowed, specs, free, fixed,
                                                 r_pref, exact)
    finite = np.logical_and.reduce([np.isfinite(chosen[p.role]) for p in specs])
    if pre is not None and not finite.any():
        # the predistorted section asks for what the allowed parts cannot give: the section as it is
        design_section, pre = section, None
        chosen, ideal, in_range, levels = _cap_stage(topology, design_section, strategy, allowed, specs, free, fixed,
                                                     r_pref, exact)
        finite = np.logical_and.reduce([np.isfinite(chosen[p.role]) for p in specs])
    n = levels.size
    all_in = in_all(in_range)
    if not finite.any():
        raise InfeasibleStage(
            f"the {topology.name} topology ({strategy}) cannot realize the {section.kind.value} section "
            f"at f0 = {section.f0_hz:g} Hz, Q = {section.q} with gain {section.gain:g} from the allowed parts",
            field=field,
        )

    dep_allowed = allowed
    if not all_in.any():
        # Every candidate pushes some part outside its range: the dependent parts may then take series
        # values beyond it (stock values stay as they are), ranked by how far out they are.
        dep_allowed = {kind: _extended(a) if (a.series is not None and not exact) else a
                       for kind, a in allowed.items()}
        for p in fixed:
            if not exact:
                chosen[p.role], _ = _snap(dep_allowed[p.kind], ideal[p.role], exact)

    # Step 1: rank the capacitor choices by their nearest-snapped closed-form score.
    score = _score(topology, design_section, section, strategy, chosen, specs, levels, weight, n)
    if all_in.any():
        score = np.where(all_in & finite, score, np.inf)
    else:
        score = np.where(finite, score + _excess(allowed, specs, chosen, n), np.inf)
    if not np.isfinite(score).any():
        raise InfeasibleStage(
            f"the {topology.name} topology ({strategy}) gives no candidate with finite f0 and Q for the "
            f"{section.kind.value} section at f0 = {section.f0_hz:g} Hz",
            field=field,
        )
    snapped = [] if exact else list(fixed)
    k = int(min(CAP_CANDIDATES_KEPT, np.isfinite(score).sum()))
    keep = np.argsort(score, kind="stable")[:k]
    gain_t = target_gain(topology, section, strategy)
    ratio = None
    if opamp_model is not None:
        # The macromodel's shift of each kept choice (nearest-snapped parts) corrects the closed form.
        snap = {p.role: chosen[p.role][keep] for p in specs}
        with np.errstate(all="ignore"):
            mod = model_figures(topology, design_section, strategy, snap, opamp_model, target=section)
            base = _ideal_figures(topology, design_section, strategy, snap, k)
            ratio = {kk: ((mod[kk] - base[kk]) if kk == "zero_damping" else (mod[kk] / base[kk]))
                     for kk in base if kk in mod}

    # Step 2: a linear screen of the dependent parts' combinations, then the closed form on the best.
    with np.errstate(all="ignore"):
        values, origin = _screen(topology, design_section, section, strategy, dep_allowed, specs, free, snapped,
                                 chosen, ideal, keep, gain_t, ratio)
    lv = levels[keep][origin]
    total = lv.size
    figs = _ideal_figures(topology, design_section, strategy, values, total)
    if ratio is not None:
        figs = _corrected(figs, {kk: v[origin] for kk, v in ratio.items()})
    err = _figure_error(section, gain_t, figs, total) + _impedance(specs, values, lv, weight, total)
    if not all_in.any():
        err = err + _excess(allowed, specs, values, total)
    err = np.where(np.isfinite(err), err, np.inf)
    predicted_model = None
    if opamp_model is not None and np.isfinite(err).any():
        # Step 3b: the best few, exactly with the macromodel.
        top = np.argsort(err, kind="stable")[:MODEL_CANDIDATES]
        top = top[np.isfinite(err[top])]
        sub = {kk: v[top] for kk, v in values.items()}
        with np.errstate(all="ignore"):
            mod = model_figures(topology, design_section, strategy, sub, opamp_model, target=section)
        exact_err = _figure_error(section, gain_t, mod, top.size) + _impedance(specs, sub, lv[top], weight, top.size)
        if not all_in.any():
            exact_err = exact_err + _excess(allowed, specs, sub, top.size)
        exact_err = np.where(np.isfinite(exact_err), exact_err, np.inf)
        if np.isfinite(exact_err).any():
            i = int(np.argmin(exact_err))
            best = int(top[i])
            err_best = float(exact_err[i])
            predicted_model = {kk: float(np.asarray(v)[i]) for kk, v in mod.items()}
            ranked = top[np.argsort(exact_err, kind="stable")]
            ranked = ranked[np.isfinite(exact_err[np.argsort(exact_err, kind="stable")])]
        else:
            best = int(np.argmin(err))
            err_best = float(err[best])
            ranked = np.argsort(err, kind="stable")
    else:
        best = int(np.argmin(err))
        err_best = float(err[best])
        ranked = np.argsort(err, kind="stable")
    if not np.isfinite(err_best):
        raise InfeasibleStage(
            f"the {topology.name} topology ({strategy}) gives no candidate with finite f0 and Q for the "
            f"{section.kind.value} section at f0 = {section.f0_hz:g} Hz",
            field=field,
        )
    chosen_values = {p.role: float(values[p.role][best]) for p in specs}
    src = int(keep[origin[best]])
    result = _selection(topology, design_section, strategy, allowed, specs, chosen_values,
                        {p.role: float(ideal[p.role][src]) for p in specs}, err_best, float(lv[best]),
                        predicted_model, pre, total)
    with np.errstate(all="ignore"):
        vec = _error_vector(section, gain_t, figs, total)
    result.alternatives = _alternatives(values, specs, err, vec, ranked, best)
    return result


def _alternatives(values: dict, specs, err: np.ndarray, vec: np.ndarray, ranked: np.ndarray, best: int) -> dict:
    """Role -> (K,) values of the chosen candidate and others, distinct: the next best ones and a spread.

    The first :data:`ALTERNATIVES_BY_RANK` follow ``ranked`` (then every other candidate by ``err``);
    the rest, up to :data:`ALTERNATIVES_KEPT`, are taken among the candidates whose error is at most
    :data:`ALTERNATIVES_POOL_FACTOR` times the chosen one's plus :data:`ALTERNATIVES_POOL_SLACK`, each the
    one farthest (largest of the weighted log-errors ``vec`` (N, F), max norm) from those already taken
    -- a greedy farthest-point choice (T. F. Gonzalez, "Clustering to minimize the maximum intercluster
    distance", Theoretical Computer Science 38 (1985) 293-306, from memory): errors in every direction,
    so that a caller judging the whole filter finds choices that offset other stages' errors.
    """
    listed = [best] + [int(i) for i in ranked if int(i) != best]
    seen = set(listed)
    order = listed + [int(i) for i in np.argsort(err, kind="stable") if int(i) not in seen]
    rows = np.array([i for i in order if np.isfinite(err[i])], dtype=int)
    table = np.stack([np.asarray(values[p.role], dtype=float)[rows] for p in specs], axis=1)
    _, first = np.unique(table, axis=0, return_index=True)
    rows = rows[np.sort(first)]                                  # distinct, in order of preference
    taken = list(rows[:ALTERNATIVES_BY_RANK])
    limit = ALTERNATIVES_POOL_FACTOR * err[best] + ALTERNATIVES_POOL_SLACK
    pool = rows[ALTERNATIVES_BY_RANK:]
    pool = pool[err[pool] <= limit][:ALTERNATIVES_POOL_SIZE]
    if pool.size and len(taken) < ALTERNATIVES_KEPT:
        v = np.where(np.isfinite(vec), vec, 0.0)
        dist = np.min(np.max(np.abs(v[pool][:, None, :] - v[np.array(taken)][None, :, :]), axis=2), axis=1)
        while len(taken) < ALTERNATIVES_KEPT and np.any(dist >= 0):
            j = int(np.argmax(dist))
            taken.append(int(pool[j]))
            dist = np.minimum(dist, np.max(np.abs(v[pool] - v[pool[j]]), axis=1))
            dist[j] = -1.0
    keep = np.array(taken, dtype=int)
    return {p.role: np.asarray(values[p.role], dtype=float)[keep] for p in specs}


def _selection(topology, design_section, strategy, allowed, specs, values, ideal, score, r_ref, predicted_model,
               pre, combinations) -> Selection:
    with np.errstate(all="ignore"):
        predicted = topology.achieved(design_section, strategy, {k: np.array([v]) for k, v in values.items()})
    predicted = {k: float(np.asarray(v).ravel()[0]) for k, v in predicted.items()}
    index, rng = {}, {}
    for p in specs:
        a = allowed[p.kind]
        v = values[p.role]
        i = int(a.index_of(np.array([v]))[0])
        index[p.role] = i if np.isclose(a.values[i], v, rtol=1e-9, atol=0.0) else None
        rng[p.role] = bool(a.low * (1 - 1e-9) <= v <= a.high * (1 + 1e-9))
    return Selection(values=values, ideal=ideal, in_range=rng, index=index, predicted=predicted, score=score,
                     r_ref_ohm=r_ref, predicted_macromodel=predicted_model, predistortion=pre,
                     combinations=combinations)


def _extended(a: Allowed) -> Allowed:
    """``a`` with its series values continued :data:`OUT_OF_RANGE_DECADES` beyond its range on both sides."""
    from service.components import series_values_in_range

    span = 10.0 ** OUT_OF_RANGE_DECADES
    values = np.asarray(series_values_in_range(a.series, a.low / span, a.high * span), dtype=float)
    m = values.size
    return Allowed(kind=a.kind, values=values, tolerance=np.full(m, float(a.tolerance[0])),
                   dielectric=(a.dielectric[0],) * m, part_id=(None,) * m, series=a.series, low=a.low, high=a.high)


def _excess(allowed, specs, values, n) -> np.ndarray:
    """How far the values lie outside their allowed ranges (decades summed over parts, times
    :data:`EXCESS_WEIGHT`), shape (n,)."""
    excess = np.zeros(n)
    for p in specs:
        a = allowed[p.kind]
        v = np.where(np.isfinite(values[p.role]) & (values[p.role] > 0), values[p.role], 1.0)
        excess = excess + np.maximum(0.0, np.log10(a.low / v)) + np.maximum(0.0, np.log10(v / a.high))
    return EXCESS_WEIGHT * excess
