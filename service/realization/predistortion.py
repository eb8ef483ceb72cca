"""Predistortion of a stage for its op-amp: design equations iterated against the macromodel.

A finite gain-bandwidth product moves a stage's poles (and, for the
feed-forward notch kinds, its zeros): with the single-pole macromodel
``A(s) = a0 / (1 + s a0 / (2 pi GBW))`` an active-RC biquad's f0 drops and
its Q rises by amounts of order ``f0/GBW`` (R. Schaumann, M. E. Van
Valkenburg, *Design of Analog Filters*, Oxford University Press, 2001,
sec. 4.5 and 5.x, "the effect of finite GBW" and "predistortion";
A. S. Sedra, J. L. Espinoza, "Sensitivity and frequency limitations of
biquadratic active filters", IEEE Trans. Circuits and Systems CAS-22 (1975)
122-130; both from memory).  Predistortion asks the design equations for a
section that the op-amp then pulls onto the target.

Rather than a closed-form first-order correction per topology, the design
equations are iterated against the macromodel itself (the circuit engine's
poles and zeros of the stage built with the op-amp model,
:func:`service.realization.gbw.figures_over_trials`)::

    d_0 = target
    d_{i+1} = d_i * target / achieved_with_opamp(design(d_i))    (f0, Q, fz; gain if the strategy sets it)

a fixed-point iteration on the ratios that converges quickly while the
op-amp's effect is a perturbation (a few iterations to 1e-6 for shifts of a
few percent); it is exact for every topology, including second-order effects
the first-order formulas leave out.  A ``notch`` section keeps ``fz = f0``
(its topologies tie the two): there the zeros (the notch frequency) are put
on target and the poles follow.

The iteration stops, keeping the last usable section, when a step asks for
something the strategy cannot realize or the stage has no usable poles.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np

from service.approximation.types import Section, SectionKind
from service.circuit import Circuit, OpAmpModel
from service.realization.errors import RealizationError
from service.realization.gbw import figures_over_trials

#: Most iterations of the fixed point.
MAX_ITERATIONS = 8
#: Relative change of every figure below which the iteration has converged.
TOLERANCE = 1e-6

_NOTCH_KINDS = (SectionKind.NOTCH, SectionKind.LOWPASS_NOTCH, SectionKind.HIGHPASS_NOTCH)


@dataclass(frozen=True)
class Predistortion:
    """What the design equations were asked for so that the op-amp pulls the stage onto the target.

    Attributes
    ----------
    section : Section
        The predistorted section (f0 Hz, Q, fz Hz, gain) given to the design equations.
    target : Section
        The section the stage must realize with the op-amp.
    iterations : int
        Macromodel evaluations made.
    converged : bool
        Whether the figures with the op-amp reached the target within :data:`TOLERANCE`.
    residual : float
        Worst relative error of f0, Q, fz (and the gain when the strategy sets it)
        with the op-amp at ``section``'s exact part values.
    """

    section: Section
    target: Section
    iterations: int
    converged: bool
    residual: float

    def as_dict(self) -> dict:
        s = self.section
        return {"f0_hz": s.f0_hz, "q": s.q, "fz_hz": s.fz_hz, "gain": s.gain, "iterations": self.iterations,
                "converged": self.converged, "residual": self.residual}


def stage_circuit(topology, section: Section, strategy: str, values: dict, model: OpAmpModel | None) -> Circuit:
    """The stage alone (``VIN`` at ``in``, output ``out``), part values scalars or arrays (one per trial)."""
    c = Circuit(title=f"{topology.name} stage")
    c.add_voltage_source("VIN", "in", "0")
    refs = {p.role: p.role for p in topology.parts(section, strategy)}
    refs.update({u: u for u in topology.opamp_roles(section, strategy)})
    topology.build(c, section, strategy, values, refs, input_node="in", output_node="out", prefix="s",
                   opamp_model=model)
    return c


def model_figures(topology, section: Section, strategy: str, values: dict, model: OpAmpModel,
                  target: Section | None = None) -> dict[str, np.ndarray]:
    """Figures of the stage with ``values`` (arrays, one per trial) and the op-amp ``model``.

    ``target`` (default ``section``) says which roots to read (see
    :func:`service.realization.gbw.figures_over_trials`).
    """
    return figures_over_trials(stage_circuit(topology, section, strategy, values, model), target or section)


def _sets_gain(topology, section: Section, strategy: str) -> bool:
    return topology.forced_gain(section, strategy) is None or (
        topology.arbitrary_gain(section.kind, strategy) and topology.forced_gain(section, strategy) is not None)


def target_gain(topology, section: Section, strategy: str) -> float:
    """The signed gain the strategy realizes for ``section`` (its forced gain, else the section's)."""
    f = topology.forced_gain(section, strategy)
    return section.gain if f is None else float(f)


def predistort(topology, section: Section, strategy: str, free: dict, model: OpAmpModel, *,
               r_ref_ohm: float) -> Predistortion:
    """The section to design for so that the stage with ``model`` realizes ``section``.

    Parameters
    ----------
    topology : Topology
    section : Section
        Target (f0 Hz, Q, fz Hz, gain).
    strategy : str
    free : dict of str to float
        Values (F) of the free capacitors the design uses.
    model : service.circuit.OpAmpModel
        Single-pole macromodel (scalar figures).
    r_ref_ohm : float
        Level (ohm) of the ratio-only resistors.

    Returns
    -------
    Predistortion
    """
    free = {k: np.array([float(np.asarray(v).ravel()[0])]) for k, v in free.items()}
    roles = {p.role for p in topology.parts(section, strategy)}
    notch = section.kind in _NOTCH_KINDS
    gain_free = _sets_gain(topology, section, strategy)
    g_target = target_gain(topology, section, strategy)
    d = section
    best, best_res = section, math.inf
    it = 0
    converged = False
    for it in range(1, MAX_ITERATIONS + 1):
        try:
            if {p.role for p in topology.parts(d, strategy)} != roles:
                break           # a step would change the stage's part list (e.g. a resistor appearing)
            values = topology.design(d, strategy, free, r_ref_ohm=r_ref_ohm)
            if not all(np.all(np.isfinite(v)) for v in values.values()):
                break
            fig = model_figures(topology, d, strategy, values, model, target=section)
        except RealizationError:
            break
        f0 = float(fig["f0_hz"][0])
        q = float(fig["q"][0]) if section.order == 2 else None
        fz = float(fig["fz_hz"][0]) if notch else None
        g = float(fig["gain"][0])
        errs = [f0 / section.f0_hz - 1]
        if q is not None:
            errs.append(q / section.q - 1)
        if fz is not None:
            errs.append(fz / section.fz_hz - 1)
        if gain_free:
            errs.append(g / g_target - 1)
        if not all(math.isfinite(e) for e in errs) or (q is not None and q <= 0):
            break
        res = max(abs(e) for e in errs)
        if res < best_res:
            best, best_res = d, res
        if res <= TOLERANCE:
            converged = True
            break
        new = {}
        if section.kind == SectionKind.NOTCH:
            new["f0_hz"] = new["fz_hz"] = d.fz_hz * section.fz_hz / fz
        else:
            new["f0_hz"] = d.f0_hz * section.f0_hz / f0
            if fz is not None:
                new["fz_hz"] = d.fz_hz * section.fz_hz / fz
        if q is not None:
            new["q"] = d.q * section.q / q
        if gain_free and g != 0 and math.isfinite(g):
            new["gain"] = d.gain * g_target / g
        d = replace(d, **new)
        try:
            if strategy not in topology.strategies(d):
                break
        except RealizationError:
            break
    return Predistortion(section=best, target=section, iterations=it, converged=converged, residual=best_res)
