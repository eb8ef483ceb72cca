"""The default topology for a section: the fewest op-amps within stated limits.

Rule (stated in the catalog, :func:`describe_auto`):

1. First order: gain exactly 1 -> ``rc_first_order`` (``unity_gain``);
   gain above 1 -> ``noninverting_first_order``; any other gain (below 1 or
   negative) -> ``inverting_first_order`` (sign tracked by the cascade).
2. Second order: the candidates that realize the section's kind
   (:data:`CANDIDATES`) are taken in order of their op-amp count.  Each is
   designed once at a representative point (capacitors at the preferred
   impedance level, their ratio chosen to make the part spread smallest)
   and accepted when

   - Q is at most the candidate's :data:`MAX_Q`,
   - the resistor spread (largest / smallest) is at most :data:`MAX_RESISTOR_SPREAD`
     and the capacitor spread at most :data:`MAX_CAPACITOR_SPREAD` (and neither beyond
     the spread of the values the caller allows),
   - the Q sensitivity ``sum |S^Q_x|`` over its parts is at most :data:`MAX_Q_SENSITIVITY`,
   - with an op-amp given: the relative f0/Q shift the op-amp causes is at most
     :data:`service.realization.gbw.PREDISTORTION_MAX_SHIFT`, and what is left of it
     after predistortion when the GBW moves by
     :data:`service.realization.gbw.GBW_SPREAD` stays within ``gbw_error``.

   Each topology is tried with the strategies of :func:`_strategies`.  The
   first op-amp count with an accepted candidate wins; among several, the
   one that realizes the section's gain exactly, sign included (a fixed-gain
   stage leaves the rest of the gain to the other stages), then the one with the
   smallest Q sensitivity.  When no candidate is accepted, the one whose worst
   figure is least beyond its limit is taken, among those whose spreads the
   caller's parts can give at all.
3. ``allpass``: no topology yet -> :class:`UnsupportedSection`.
4. A requirement design whose stages' part choices, made together for the whole
   response, leave the requirement short: up to three automatically chosen stages
   (furthest off first) take rule 2's choice among the candidates with more
   op-amps (:func:`auto_upgrade`), each kept only when it brings the filter
   closer to meeting (``service.realization.design``).

The limits are common practice of the trade, not a single published figure;
the reasoning follows Schaumann & Van Valkenburg [1]_ ch. 3-5 (the Q
sensitivity of single-op-amp biquads grows with Q, while two-integrator-loop
biquads keep ``S^Q`` of their passives near 1 regardless of Q) and Mancini
[2]_ sec. 16.9 (component spread), both from memory.

References
----------
.. [1] R. Schaumann, M. E. Van Valkenburg, *Design of Analog Filters*,
   Oxford University Press, 2001.
.. [2] R. Mancini (ed.), *Op Amps for Everyone*, TI SLOD006B, 2002, ch. 16.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from functools import lru_cache

import numpy as np

from service.approximation.types import Section, SectionKind
from service.realization.errors import RealizationError, UnsupportedSection
from service.realization.topologies.base import Topology
from service.realization.topologies.delyiannis_friend import DELYIANNIS_FRIEND_NOTCH
from service.realization.topologies.first_order import INVERTING_FIRST_ORDER, NONINVERTING_FIRST_ORDER, RC_FIRST_ORDER
from service.realization.topologies.multiple_feedback import MULTIPLE_FEEDBACK
from service.realization.topologies.sallen_key import SALLEN_KEY
from service.realization.topologies.state_variable import STATE_VARIABLE
from service.realization.topologies.tow_thomas import TOW_THOMAS
from service.realization.topologies.twin_t import TWIN_T_NOTCH

#: Largest Q each topology is used for automatically.
#: common practice (no source): single-op-amp positive-feedback sections are kept below Q of about
#: 10-20 (Schaumann & Van Valkenburg, ch. 5, from memory); two-integrator loops have no such bound here.
MAX_Q = {
    "sallen_key": 10.0,
    "multiple_feedback": 20.0,
    "twin_t_notch": 20.0,
    "delyiannis_friend_notch": 20.0,
    "tow_thomas": 200.0,
    "state_variable": 200.0,
}
#: Largest resistor spread (largest / smallest resistance of a stage).
#: common practice (no source): within three decades, so that every resistor of a
#: stage fits the default 1 kohm - 1 Mohm range with room to move the impedance level.
MAX_RESISTOR_SPREAD = 1000.0
#: Largest capacitor spread (largest / smallest capacitance of a stage).
#: common practice (no source): C0G parts beyond about 50:1 leave the small one near
#: board capacitance or the large one beyond the C0G range.
MAX_CAPACITOR_SPREAD = 50.0
#: Largest Q sensitivity, sum over the stage's parts of |S^Q_x| (ideal op-amp).
#: common practice (no source): with 1 % resistors and 2 % C0G capacitors in statistical
#: combination such a stage keeps its Q within about 5 % (one standard deviation).
MAX_Q_SENSITIVITY = 12.0

#: Second-order candidates per section kind, in order of preference within an op-amp count.
CANDIDATES: dict[SectionKind, tuple[Topology, ...]] = {
    SectionKind.LOWPASS: (SALLEN_KEY, MULTIPLE_FEEDBACK, TOW_THOMAS, STATE_VARIABLE),
    SectionKind.HIGHPASS: (SALLEN_KEY, MULTIPLE_FEEDBACK, TOW_THOMAS, STATE_VARIABLE),
    SectionKind.BANDPASS: (MULTIPLE_FEEDBACK, TOW_THOMAS, STATE_VARIABLE),
    SectionKind.NOTCH: (TWIN_T_NOTCH, DELYIANNIS_FRIEND_NOTCH, TOW_THOMAS, STATE_VARIABLE),
    SectionKind.LOWPASS_NOTCH: (DELYIANNIS_FRIEND_NOTCH, TOW_THOMAS, STATE_VARIABLE),
    SectionKind.HIGHPASS_NOTCH: (DELYIANNIS_FRIEND_NOTCH, TOW_THOMAS, STATE_VARIABLE),
}

#: The representative design: resistor level (ohm) and the capacitor ratios tried (log grid).
REPRESENTATIVE_R_OHM = 10e3
_RATIOS = np.geomspace(1e-2, 1e2, 33)

AUTO_RULE = (
    "First order: rc_first_order for a gain of exactly 1, noninverting_first_order above 1, "
    "inverting_first_order otherwise. Second order: among the topologies that realize the section's kind, "
    "the fewest op-amps whose Q, resistor and capacitor spread, Q sensitivity (sum of |S^Q| over the parts) "
    "and, with an op-amp given, the GBW needed after predistortion are within the stated limits, at a "
    "representative design (capacitors at the preferred impedance level, ratio chosen for the smallest "
    "spread); among equals the one that realizes the section's gain exactly, then the smallest Q "
    "sensitivity; when none is within the limits, the one least beyond them among those the allowed parts "
    "can build. For a requirement design, when the stages' part choices (made together for the whole "
    "response) leave the requirement short, up to three stages, furthest off first, take the same rule's "
    "choice among the topologies with more op-amps, each kept only when it brings the filter closer to "
    "meeting (warning stage_topology_raised)."
)


@dataclass(frozen=True)
class Assessment:
    """How a candidate fares at the representative design (see the module docstring).

    Attributes
    ----------
    topology : Topology
    strategy : str
    opamps : int
    exact_gain : bool
        Whether the strategy realizes the section's gain, sign included.
    q_sensitivity : float
        ``sum |S^Q_x|``.
    resistor_spread, capacitor_spread : float
    gbw_shift : float or None
        Relative f0/Q shift with the op-amp (None without one).
    excess : float
        Largest ratio of a figure to its limit (<= 1 when accepted).
    fits_parts : bool
        Whether its spreads fit within the spread of the values the caller allows (a hard bound:
        a stage beyond it cannot be built from those parts at all).
    """

    topology: Topology
    strategy: str
    opamps: int
    exact_gain: bool
    q_sensitivity: float
    resistor_spread: float
    capacitor_spread: float
    gbw_shift: float | None
    excess: float
    fits_parts: bool = True

    @property
    def accepted(self) -> bool:
        return self.excess <= 1.0


def _strategies(topology: Topology, section: Section, slow: bool) -> list[str]:
    """The strategies auto considers for ``topology`` (empty when none applies).

    Sallen-Key: the follower, and the given gain when it is above 1 and the op-amp is not slow
    (``GBW < 100 Q f0``: a follower keeps the op-amp's whole bandwidth); the Delyiannis-Friend
    notch: the given gain when it is reachable, and the maximum gain; others: their default.
    """
    try:
        options = topology.strategies(section)
    except RealizationError:
        return []
    if topology is SALLEN_KEY:
        want = ["given_gain"] if (abs(section.gain) > 1.0 and not slow) else []
        return [s for s in want + ["unity_gain"] if s in options]
    if topology is DELYIANNIS_FRIEND_NOTCH:
        return [s for s in ("given_gain", "maximum_gain") if s in options]
    return list(options[:1])


def _representative(topology: Topology, section: Section, strategy: str) -> dict[str, float] | None:
    """Part values at the preferred level with the capacitor ratios of smallest spread (None: infeasible)."""
    w0 = 2 * math.pi * section.f0_hz
    c = 1.0 / (w0 * REPRESENTATIVE_R_OHM)
    roles = topology.free_roles(section, strategy)
    if len(roles) > 2:
        return None
    grids = np.meshgrid(*([_RATIOS] * len(roles)), indexing="ij") if roles else []
    free = {r: c * g.ravel() for r, g in zip(roles, grids)}
    try:
        with np.errstate(all="ignore"):
            v = topology.design(section, strategy, free, r_ref_ohm=REPRESENTATIVE_R_OHM)
    except RealizationError:
        return None
    parts = topology.parts(section, strategy)
    res = np.array([v[p.role] for p in parts if p.kind == "resistor"])
    cap = np.array([v[p.role] for p in parts if p.kind == "capacitor"])
    with np.errstate(all="ignore"):
        cost = np.log(res.max(axis=0) / res.min(axis=0)) + np.log(cap.max(axis=0) / cap.min(axis=0))
    cost = np.where(np.isfinite(cost), cost, np.inf)
    if not np.isfinite(cost).any():
        return None
    i = int(np.argmin(cost))
    return {k: float(np.asarray(x).ravel()[i]) for k, x in v.items()}


def assess(topology: Topology, strategy: str, section: Section, opamp_model=None,
           gbw_error: float = 0.01, spans: tuple[float, float] | None = None) -> Assessment | None:
    """The candidate's figures at the representative design (None when it cannot realize the section).

    ``spans`` (resistor, capacitor): the ratio of the largest to the smallest value the caller
    allows of each kind; a spread beyond it (or beyond the stated limit) is out of the limits.
    """
    from service.realization.gbw import GBW_SPREAD, PREDISTORTION_MAX_SHIFT

    values = _representative(topology, section, strategy)
    if values is None:
        return None
    parts = topology.parts(section, strategy)
    res = [values[p.role] for p in parts if p.kind == "resistor"]
    cap = [values[p.role] for p in parts if p.kind == "capacitor"]
    r_spread = max(res) / min(res) if res else 1.0
    c_spread = max(cap) / min(cap) if cap else 1.0
    sens = topology.sensitivities(section, strategy, values)
    q_sens = float(sum(abs(s[1]) for s in sens.values()))
    r_max, c_max = MAX_RESISTOR_SPREAD, MAX_CAPACITOR_SPREAD
    if spans is not None:
        r_max, c_max = min(r_max, spans[0]), min(c_max, spans[1])
    ratios = [section.q / MAX_Q.get(topology.name, math.inf), r_spread / r_max, c_spread / c_max,
              q_sens / MAX_Q_SENSITIVITY]
    shift = None
    if opamp_model is not None:
        from service.realization.predistortion import model_figures

        with np.errstate(all="ignore"):
            fig = model_figures(topology, section, strategy, {k: np.array([v]) for k, v in values.items()},
                                opamp_model)
            ideal = topology.achieved(section, strategy, {k: np.array([v]) for k, v in values.items()})
        shift = float(max(abs(fig["f0_hz"][0] / ideal["f0_hz"][0] - 1), abs(fig["q"][0] / ideal["q"][0] - 1)))
        if not math.isfinite(shift) or fig["q"][0] <= 0:
            shift = math.inf
        ratios += [shift / PREDISTORTION_MAX_SHIFT, shift * GBW_SPREAD / gbw_error]
    forced = topology.forced_gain(section, strategy)
    exact_gain = forced is None or bool(np.isclose(forced, section.gain, rtol=1e-9))
    fits = spans is None or (r_spread <= spans[0] * (1 + 1e-9) and c_spread <= spans[1] * (1 + 1e-9))
    return Assessment(topology, strategy, len(topology.opamp_roles(section, strategy)), exact_gain, q_sens,
                      r_spread, c_spread, shift, float(max(ratios)), fits)


def _first_order(section: Section) -> tuple[Topology, str]:
    kind, g = section.kind, section.gain
    if kind not in (SectionKind.LOWPASS, SectionKind.HIGHPASS):
        raise UnsupportedSection(f"no topology realizes a first-order {kind.value!r} section", field="section.kind")
    if g == 1.0:
        return RC_FIRST_ORDER, "unity_gain"
    if g > 1.0:
        return NONINVERTING_FIRST_ORDER, "given_gain"
    return INVERTING_FIRST_ORDER, "given_gain"


@lru_cache(maxsize=512)
def _choose(section: Section, model_key, gbw_error: float, spans, above: int = 0) -> tuple[Topology, str] | None:
    opamp_model = None
    if model_key is not None:
        from service.circuit import OpAmpModel

        opamp_model = OpAmpModel(gbw_hz=model_key[0], a0=model_key[1], rout_ohm=model_key[2])
    candidates = CANDIDATES.get(section.kind)
    if not candidates:
        raise UnsupportedSection(f"no topology realizes a {section.kind.value!r} section yet", field="section.kind")
    slow = opamp_model is not None and model_key[0] < 100.0 * (section.q or 1.0) * section.f0_hz
    options = [(len(top.opamp_roles(section, strategy)), top, strategy)
               for top in candidates for strategy in _strategies(top, section, slow)]
    options = [o for o in options if o[0] > above]
    if above and not options:
        return None
    found = []
    for count in sorted({o[0] for o in options}):
        group = [a for _, top, strategy in (o for o in options if o[0] == count)
                 if (a := assess(top, strategy, section, opamp_model, gbw_error, spans)) is not None]
        found += group
        accepted = [a for a in group if a.accepted]
        if accepted:
            best = min(accepted, key=lambda a: (not a.exact_gain, a.q_sensitivity))
            return best.topology, best.strategy
    if not found:
        if above:
            return None
        raise UnsupportedSection(
            f"no topology realizes this {section.kind.value} section (f0 {section.f0_hz:.6g} Hz, Q {section.q}, "
            f"gain {section.gain:.6g})", field="section")
    best = min(found, key=lambda a: (not a.fits_parts, a.excess, a.opamps))
    return best.topology, best.strategy


def auto_topology(section: Section, *, opamp_gbw_hz: float | None = None, opamp_model=None,
                  gbw_error: float = 0.01, spans: tuple[float, float] | None = None) -> tuple[Topology, str]:
    """Default ``(topology, strategy)`` for ``section`` by the rule of the module docstring.

    Parameters
    ----------
    section : Section
    opamp_gbw_hz : float, optional
        Gain-bandwidth product (Hz) of the op-amp, if known (a single-pole
        model with 100 dB open-loop gain is assumed when ``opamp_model`` is not given).
    opamp_model : service.circuit.OpAmpModel, optional
        The op-amp's single-pole macromodel.
    gbw_error : float
        Relative f0/Q error the GBW criterion is for.
    spans : (float, float), optional
        Largest / smallest value the caller allows of resistors and of capacitors (a stock list of
        capacitors one decade wide cannot give a stage a 30:1 capacitor ratio).

    Returns
    -------
    (Topology, str)

    Raises
    ------
    UnsupportedSection
        For a kind no topology realizes (``allpass``).
    """
    if section.order == 1:
        return _first_order(section)
    key = None
    if opamp_model is not None:
        key = (float(opamp_model.gbw_hz), float(opamp_model.a0), float(opamp_model.rout_ohm))
    elif opamp_gbw_hz is not None:
        key = (float(opamp_gbw_hz), 1e5, 0.0)
    if spans is not None:
        spans = (float(spans[0]), float(spans[1]))
    return _choose(section, key, float(gbw_error), spans)


def auto_upgrade(section: Section, opamps: int, *, opamp_model=None, gbw_error: float = 0.01,
                 spans: tuple[float, float] | None = None) -> tuple[Topology, str] | None:
    """The rule of :func:`auto_topology` among the candidates with more than ``opamps`` op-amps (None: none).

    What a stage takes when its part choices, with the fewest op-amps, leave the whole filter short of its
    requirement (:func:`service.realization.design.design_filter`): the next op-amp count up.
    """
    if section.order == 1:
        return None
    key = None
    if opamp_model is not None:
        key = (float(opamp_model.gbw_hz), float(opamp_model.a0), float(opamp_model.rout_ohm))
    if spans is not None:
        spans = (float(spans[0]), float(spans[1]))
    return _choose(section, key, float(gbw_error), spans, int(opamps))


def describe_auto() -> dict:
    """The rule and limits of ``topology: "auto"`` for the catalog."""
    from service.realization.gbw import GBW_SPREAD, PREDISTORTION_MAX_SHIFT

    return {
        "rule": AUTO_RULE,
        "limits": {
            "max_q": dict(MAX_Q),
            "max_resistor_spread": MAX_RESISTOR_SPREAD,
            "max_capacitor_spread": MAX_CAPACITOR_SPREAD,
            "max_q_sensitivity": MAX_Q_SENSITIVITY,
            "max_opamp_shift": PREDISTORTION_MAX_SHIFT,
            "gbw_spread": GBW_SPREAD,
        },
        "candidates": {k.value: [t.name for t in ts] for k, ts in CANDIDATES.items()},
    }


__all__ = ["auto_topology", "auto_upgrade", "assess", "Assessment", "describe_auto", "AUTO_RULE", "CANDIDATES", "MAX_Q",
           "MAX_RESISTOR_SPREAD", "MAX_CAPACITOR_SPREAD", "MAX_Q_SENSITIVITY"]
