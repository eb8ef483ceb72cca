"""Choose the stages' part values together, for the whole response: errors of one stage offset by another.

Each stage's part search (:mod:`service.realization.selection`) ranks its own
candidates by how close the stage comes to its section.  With a coarse series
(E12, E24, a short stock list) no candidate of a high-Q stage is close, and a
cascade of stages each off in its own direction can miss a requirement that
other, individually slightly worse, choices meet: two equal sections off in
the same direction double their error, off in opposite directions they cancel
to first order.  So, when the transfer function comes from a requirement (its
band edges and the losses it was designed for are known), the stages' ranked
candidates are chosen jointly:

1. Every candidate of every stage is built with its op-amp model and its
   log-magnitude ``ln|T_k,a(j w)|`` computed on a grid over the passband and
   stopband segments (circuit engine, one batched call per stage).
2. The filter's loss is the sum of the chosen candidates' log-magnitudes, measured
   from its largest passband gain (the rule of the service's verifier); the
   margins are those against the requirement the transfer function was
   designed for, relaxed by the reserves the caller took off it (so they are
   those of the requirement as asked).
3. Coordinate ascent on the worst margin: stage by stage, the candidate that
   maximizes the worst margin with the other stages held (all of that stage's
   candidates at once), sweeps repeated until none improves -- the cyclic
   coordinate method for a max-min objective over a product of finite sets
   (D. G. Luenberger, Y. Ye, *Linear and Nonlinear Programming*, 3rd ed.,
   Springer, 2008, sec. 8.9 "coordinate descent methods", from memory) --,
   from the stages' own best candidates and from a few seeded starts among
   their better ones; the best end wins.

This is a proxy: a sampled grid and the band ends below.  It chooses; the
service's verifier (whole-band proof from the circuit's poles and zeros) judges
the result.
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np

from service.circuit.roots import transfer_roots
from service.deadline import check as check_deadline
from service.realization.analysis import StagePlan, stage_circuit

#: Grid points per decade of every band segment (at least :data:`MIN_SEGMENT_POINTS` per segment).
POINTS_PER_DECADE = 160
MIN_SEGMENT_POINTS = 48
#: How far below a lowpass (or bandstop's lower) passband edge its passband is sampled, as a factor.
PASSBAND_DEPTH = 100.0
#: How far beyond an open passband's edge it is sampled (factor), and beyond an open stopband's edge.
OPEN_PASSBAND_SPAN = 10.0
OPEN_STOPBAND_SPAN = 20.0
#: With real op-amps an open passband is sampled at most up to the slowest op-amp's GBW over this
#: (the verifier holds the ripple at least that far).
OPAMP_BANDWIDTH_FACTOR = 20.0
#: Most sweeps of the coordinate ascent.
MAX_SWEEPS = 4
#: Least improvement (dB) of the worst margin that counts as one.
MIN_IMPROVEMENT_DB = 1e-6
#: Further starts of the ascent (each stage at one of its first :data:`RESTART_DEPTH` candidates, drawn from
#: a generator seeded with :data:`RESTART_SEED`); the best end wins.  A max-min objective has many local
#: optima; a few starts cost little (the stages' curves are computed once).
RESTARTS = 8
RESTART_DEPTH = 8
RESTART_SEED = 12


@dataclasses.dataclass(frozen=True)
class JointChoice:
    """What the joint choice did.

    Attributes
    ----------
    choice : tuple of int
        Index of the chosen candidate of each stage in its ranked list (0: the stage's own best).
    margin_before_db, margin_after_db : float
        The proxy's worst margin (dB) with every stage's own best candidate, and with the joint choice.
    """

    choice: tuple[int, ...]
    margin_before_db: float
    margin_after_db: float


def band_grid(approximation, reserves_db: tuple[float, float] = (0.0, 0.0), gbw_hz: float | None = None):
    """The frequency grid of the proxy and the limit at each point.

    Parameters
    ----------
    approximation : Approximation
        With ``edges`` (a requirement design) and ``response``.
    reserves_db : (float, float)
        What the requirement as asked leaves beyond the one the transfer function was designed for, dB:
        (passband, stopband).
    gbw_hz : float or None
        The op-amps' GBW (Hz), which may end an open passband's sampling (None: ideal op-amps).

    Returns
    -------
    f_hz : ndarray, shape (F,)
    passband : ndarray of bool, shape (F,)
    limit_db : ndarray, shape (F,)
        Largest loss (passband) or least loss (stopband), dB.
    None when the approximation carries no band edges.
    """
    edges = getattr(approximation, "edges", None)
    if not edges:
        return None
    pb = [e.frequency_hz for e in edges if e.band == "passband"]
    sb = [e.frequency_hz for e in edges if e.band == "stopband"]
    if not pb or not sb:
        return None
    ripple = [e.required_db for e in edges if e.band == "passband"][0] + float(reserves_db[0])
    atten = [e.required_db for e in edges if e.band == "stopband"][0] - float(reserves_db[1])
    top = math.inf if gbw_hz is None else float(gbw_hz) / OPAMP_BANDWIDTH_FACTOR
    response = getattr(approximation.response, "value", approximation.response)
    if response == "lowpass":
        p_segs, s_segs = [(pb[0] / PASSBAND_DEPTH, pb[0])], [(sb[0], sb[0] * OPEN_STOPBAND_SPAN)]
    elif response == "highpass":
        p_segs = [(pb[0], max(pb[0] * 1.0001, min(pb[0] * OPEN_PASSBAND_SPAN, top)))]
        s_segs = [(sb[0] / OPEN_STOPBAND_SPAN, sb[0])]
    elif response == "bandpass":
        p_segs = [(pb[0], pb[1])]
        s_segs = [(sb[0] / OPEN_STOPBAND_SPAN, sb[0]), (sb[1], sb[1] * OPEN_STOPBAND_SPAN)]
    else:
        p_segs = [(pb[0] / PASSBAND_DEPTH, pb[0]), (pb[1], max(pb[1] * 1.0001, min(pb[1] * OPEN_PASSBAND_SPAN, top)))]
        s_segs = [(sb[0], sb[1])]

    def seg(lo, hi):
        n = max(MIN_SEGMENT_POINTS, int(math.ceil(math.log10(hi / lo) * POINTS_PER_DECADE)))
        return np.geomspace(lo, hi, n)

    fp = np.concatenate([seg(*s) for s in p_segs])
    fs = np.concatenate([seg(*s) for s in s_segs])
    f = np.concatenate([fp, fs])
    passband = np.concatenate([np.ones(fp.size, bool), np.zeros(fs.size, bool)])
    limit = np.where(passband, ripple, atten)
    return f, passband, limit


def _margins(log_gain: np.ndarray, passband: np.ndarray, limit_db: np.ndarray) -> np.ndarray:
    """Worst margin (dB) of each row of ``log_gain`` (N, F) (nepers), loss from the largest passband gain."""
    ref = np.max(log_gain[:, passband], axis=1, keepdims=True)
    loss = (ref - log_gain) * (20.0 / math.log(10.0))
    m = np.where(passband, limit_db - loss, loss - limit_db)
    m = np.where(np.isfinite(m), m, np.where(passband, -np.inf, np.inf))
    return np.min(m, axis=1)


def _ascend(curves: list[np.ndarray], choice: list[int], passband: np.ndarray, limit: np.ndarray
            ) -> tuple[list[int], float]:
    """Coordinate ascent on the worst margin from ``choice`` (module notes): the final choice and its margin."""
    choice = list(choice)
    total = np.sum([c[i] for c, i in zip(curves, choice)], axis=0)
    current = float(_margins(total[None], passband, limit)[0])
    for _ in range(MAX_SWEEPS):
        improved = False
        for k, c in enumerate(curves):
            if c.shape[0] < 2:
                continue
            trial = total[None, :] - c[choice[k]][None, :] + c
            m = _margins(trial, passband, limit)
            i = int(np.argmax(m))
            if m[i] > current + MIN_IMPROVEMENT_DB:
                total, choice[k], current = trial[i], i, float(m[i])
                improved = True
        if not improved:
            break
    return choice, current


def stage_curves(plan: StagePlan, omega: np.ndarray) -> np.ndarray:
    """``ln|T(j omega)|`` of each of the stage's candidates, built with its op-amp model, shape (K, F).

    ``omega`` (F,) in rad/s; the candidates are ``plan.alternatives`` (the components alone when it has
    fewer than two).  One batched call of the circuit engine.
    """
    check_deadline("realization.compensation")
    options = plan.alternatives if len(plan.alternatives) > 1 else (plan.components,)
    values = {c.ref: np.array([alt[j].value for alt in options]) for j, c in enumerate(plan.components)}
    with np.errstate(all="ignore"):
        lm = transfer_roots(stage_circuit(plan, plan.model()).with_values(values)).log_magnitude(omega)
    return np.where(np.isfinite(lm), lm, -np.inf)


def best_choice(curves: list[np.ndarray], passband: np.ndarray, limit_db: np.ndarray) -> JointChoice | None:
    """The joint choice over the stages' candidate curves (module notes); None when the stages' own best
    candidates give no finite margin."""
    start = float(_margins(np.sum([c[0] for c in curves], axis=0)[None], passband, limit_db)[0])
    if not math.isfinite(start):
        return None
    rng = np.random.default_rng(RESTART_SEED)
    best_choice_, best = None, -math.inf
    for r in range(1 + RESTARTS):
        if r == 0:
            init = [0] * len(curves)
        else:   # a start among each stage's better candidates, drawn from a fixed seed (reproducible)
            init = [int(rng.integers(0, min(c.shape[0], RESTART_DEPTH))) for c in curves]
        choice, current = _ascend(curves, init, passband, limit_db)
        if current > best + MIN_IMPROVEMENT_DB:
            best_choice_, best = choice, current
    return JointChoice(tuple(best_choice_), start, best)


def apply_choice(plans: list[StagePlan], choice) -> list[StagePlan]:
    """The stages with the chosen candidate of each as ``components`` and first in ``alternatives``."""
    out = []
    for plan, i in zip(plans, choice):
        if i == 0:
            out.append(plan)
            continue
        alts = (plan.alternatives[i],) + plan.alternatives[:i] + plan.alternatives[i + 1:]
        out.append(dataclasses.replace(plan, components=list(plan.alternatives[i]), alternatives=alts))
    return out


def proxy_grid(plans: list[StagePlan], approximation, reserves_db: tuple[float, float] = (0.0, 0.0)):
    """``(omega, passband, limit_db)`` of the proxy for these stages (their slowest op-amp ends an open
    passband's grid), or None when the approximation has no band edges."""
    gbws = [u.gbw_hz for p in plans for u in p.opamps if u.gbw_hz is not None]
    grid = band_grid(approximation, reserves_db, min(gbws) if gbws else None)
    if grid is None:
        return None
    f, passband, limit = grid
    return 2.0 * math.pi * f, passband, limit


def choose_jointly(plans: list[StagePlan], approximation, *, reserves_db: tuple[float, float] = (0.0, 0.0)
                   ) -> tuple[list[StagePlan], JointChoice | None]:
    """The stages with their candidates chosen together for the whole response (module notes).

    Parameters
    ----------
    plans : list of StagePlan
        In cascade order; each stage's ``alternatives`` (its ranked candidates, the chosen one first).
    approximation : Approximation
        The transfer function realized, with its band edges (a requirement design).
    reserves_db : (float, float)
        Passband and stopband reserves (dB) the requirement as asked leaves beyond the approximation's.

    Returns
    -------
    plans : list of StagePlan
        The same stages, each with its chosen candidate as ``components`` and first in ``alternatives``
        (the others after it in their ranked order); the input itself when nothing applies.
    choice : JointChoice or None
        None when nothing applies (no band edges, no stage with more than one candidate).
    """
    if not any(len(p.alternatives) > 1 for p in plans):
        return plans, None
    grid = proxy_grid(plans, approximation, reserves_db)
    if grid is None:
        return plans, None
    omega, passband, limit = grid
    joint = best_choice([stage_curves(p, omega) for p in plans], passband, limit)
    if joint is None:
        return plans, None
    return apply_choice(plans, joint.choice), joint


__all__ = ["choose_jointly", "band_grid", "proxy_grid", "stage_curves", "best_choice", "apply_choice", "JointChoice"]
