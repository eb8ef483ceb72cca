"""First-order lowpass and highpass stages.

Three topologies, each with one free capacitor ``C1``:

``rc_first_order`` (strategy ``unity_gain``)
    Passive RC followed by a follower ``U1``.  Lowpass: ``R1`` input -> p,
    ``C1`` p -> ground; highpass: ``C1`` input -> p, ``R1`` p -> ground.
    ``H = 1/(1 + s R1 C1)`` or ``s R1 C1/(1 + s R1 C1)``; gain 1, w0 = 1/(R1 C1).
``inverting_first_order`` (strategy ``given_gain``)
    Lowpass: ``R1`` input -> n (inverting input), ``R2 || C1`` n -> output:
    ``H = -(R2/R1)/(1 + s R2 C1)``, w0 = 1/(R2 C1).  Highpass: ``R1`` input
    -> x, ``C1`` x -> n, ``R2`` n -> output: ``H = -(R2/R1) s R1 C1/(1 + s R1 C1)``,
    w0 = 1/(R1 C1).  Gain ``-|g|`` (inverting), any magnitude.
``noninverting_first_order`` (strategy ``given_gain``)
    The passive RC into a non-inverting amplifier of gain ``K = 1 + Rf/Rg``
    (``Rf`` output -> n, ``Rg`` n -> ground); any gain above 1.

References
----------
.. [1] R. Mancini (ed.), *Op Amps for Everyone*, TI SLOD006B, 2002, ch. 16,
   sec. 16.3.1 (first-order low-pass), 16.4 (first-order high-pass).
.. [2] W. G. Jung (ed.), *Op Amp Applications Handbook*, Analog Devices /
   Newnes, 2005, ch. 5 (analog filters).
"""

from __future__ import annotations

import numpy as np

from service.approximation.types import SectionKind
from service.realization.topologies.base import GROUND, Topology, arr, capacitor, omega, resistor

_LP = SectionKind.LOWPASS
_HP = SectionKind.HIGHPASS

_REFERENCE = (
    "R. Mancini (ed.), Op Amps for Everyone, TI SLOD006B (2002), ch. 16, sec. 16.3.1 and 16.4; "
    "W. G. Jung (ed.), Op Amp Applications Handbook (2005), ch. 5"
)


class _FirstOrder(Topology):
    kinds = frozenset({_LP, _HP})
    order = 1
    reference = _REFERENCE

    def opamp_roles(self, section, strategy):
        return ("U1",)


class RcFirstOrder(_FirstOrder):
    """Passive RC section with a unity-gain buffer (gain fixed at 1)."""

    name = "rc_first_order"

    def strategy_names(self, kind):
        return ("unity_gain",)

    def arbitrary_gain(self, kind, strategy):
        return False

    def parts(self, section, strategy):
        return (capacitor("C1"), resistor("R1"))

    def forced_gain(self, section, strategy):
        self.check(section, strategy)
        return 1.0

    def _design(self, section, strategy, free, r_ref):
        c1 = free["C1"]
        return {"C1": c1, "R1": 1.0 / (omega(section) * c1)}, np.zeros(c1.shape, dtype=bool)

    def polynomials(self, section, strategy, values):
        tau = arr(values, "R1") * arr(values, "C1")
        one = 0.0 * tau + 1.0
        if section.kind == _LP:
            return [0.0 * tau, one], [tau, one]
        return [tau, 0.0 * tau], [tau, one]

    def build(self, circuit, section, strategy, values, refs, *, input_node, output_node, prefix, opamp_model=None):
        self.check(section, strategy)
        p = f"{prefix}_p"
        if section.kind == _LP:
            circuit.add_resistor(refs["R1"], input_node, p, values["R1"])
            circuit.add_capacitor(refs["C1"], p, GROUND, values["C1"])
        else:
            circuit.add_capacitor(refs["C1"], input_node, p, values["C1"])
            circuit.add_resistor(refs["R1"], p, GROUND, values["R1"])
        circuit.add_opamp(refs["U1"], plus=p, minus=output_node, output=output_node, model=opamp_model)


class InvertingFirstOrder(_FirstOrder):
    """Inverting first-order stage; gain ``-|g|`` of any magnitude."""

    name = "inverting_first_order"

    def strategy_names(self, kind):
        return ("given_gain",)

    def parts(self, section, strategy):
        return (capacitor("C1"), resistor("R1"), resistor("R2"))

    def forced_gain(self, section, strategy):
        self.check(section, strategy)
        return -abs(section.gain)

    def _design(self, section, strategy, free, r_ref):
        c1 = free["C1"]
        k = abs(section.gain)
        r = 1.0 / (omega(section) * c1)
        if section.kind == _LP:
            r2 = r
            r1 = r2 / k
        else:
            r1 = r
            r2 = k * r1
        return {"C1": c1, "R1": r1, "R2": r2}, np.zeros(c1.shape, dtype=bool)

    def polynomials(self, section, strategy, values):
        r1, r2, c1 = arr(values, "R1"), arr(values, "R2"), arr(values, "C1")
        one = 0.0 * r1 + 1.0
        if section.kind == _LP:
            return [0.0 * r1, -r2 / r1 * one], [r2 * c1, one]
        return [-r2 * c1, 0.0 * r1], [r1 * c1, one]

    def build(self, circuit, section, strategy, values, refs, *, input_node, output_node, prefix, opamp_model=None):
        self.check(section, strategy)
        n = f"{prefix}_n"
        if section.kind == _LP:
            circuit.add_resistor(refs["R1"], input_node, n, values["R1"])
            circuit.add_resistor(refs["R2"], n, output_node, values["R2"])
            circuit.add_capacitor(refs["C1"], n, output_node, values["C1"])
        else:
            x = f"{prefix}_x"
            circuit.add_resistor(refs["R1"], input_node, x, values["R1"])
            circuit.add_capacitor(refs["C1"], x, n, values["C1"])
            circuit.add_resistor(refs["R2"], n, output_node, values["R2"])
        circuit.add_opamp(refs["U1"], plus=GROUND, minus=n, output=output_node, model=opamp_model)


class NoninvertingFirstOrder(_FirstOrder):
    """Passive RC into a non-inverting amplifier; gain ``K = 1 + Rf/Rg > 1``."""

    name = "noninverting_first_order"

    def strategy_names(self, kind):
        return ("given_gain",)

    def strategy_applicable(self, section, strategy):
        if not section.gain > 1.0:
            return f"needs a gain above 1 (rc_first_order realizes gain 1, inverting_first_order any magnitude), got {section.gain:g}"
        return None

    def parts(self, section, strategy):
        return (capacitor("C1"), resistor("R1"), resistor("Rf"), resistor("Rg"))

    def forced_gain(self, section, strategy):
        self.check(section, strategy)
        return None

    def _design(self, section, strategy, free, r_ref):
        c1 = free["C1"]
        full = np.full(c1.shape, 1.0)
        return {"C1": c1, "R1": 1.0 / (omega(section) * c1), "Rf": r_ref * (section.gain - 1.0) * full,
                "Rg": r_ref * full}, np.zeros(c1.shape, dtype=bool)

    def polynomials(self, section, strategy, values):
        tau = arr(values, "R1") * arr(values, "C1")
        k = 1.0 + arr(values, "Rf") / arr(values, "Rg")
        one = 0.0 * tau + 1.0
        if section.kind == _LP:
            return [0.0 * tau, k * one], [tau, one]
        return [k * tau, 0.0 * tau], [tau, one]

    def build(self, circuit, section, strategy, values, refs, *, input_node, output_node, prefix, opamp_model=None):
        self.check(section, strategy)
        p, n = f"{prefix}_p", f"{prefix}_n"
        if section.kind == _LP:
            circuit.add_resistor(refs["R1"], input_node, p, values["R1"])
            circuit.add_capacitor(refs["C1"], p, GROUND, values["C1"])
        else:
            circuit.add_capacitor(refs["C1"], input_node, p, values["C1"])
            circuit.add_resistor(refs["R1"], p, GROUND, values["R1"])
        circuit.add_resistor(refs["Rf"], output_node, n, values["Rf"])
        circuit.add_resistor(refs["Rg"], n, GROUND, values["Rg"])
        circuit.add_opamp(refs["U1"], plus=p, minus=n, output=output_node, model=opamp_model)


RC_FIRST_ORDER = RcFirstOrder()
INVERTING_FIRST_ORDER = InvertingFirstOrder()
NONINVERTING_FIRST_ORDER = NoninvertingFirstOrder()
