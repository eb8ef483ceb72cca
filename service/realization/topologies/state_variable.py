"""Three-op-amp state-variable (Kerwin-Huelsman-Newcomb) biquad, with a summer for the notch kinds.

Circuit (roles).  ``U1`` sums: ``R1`` input -> n1, ``R2`` hp -> n1,
``R3`` lp -> n1 on its inverting input, ``R4`` bp -> p1, ``R5`` p1 -> ground
on its non-inverting input; its output is the highpass node ``hp``.
``U2`` integrates hp into ``bp`` (``R6`` hp -> n2, ``C1`` n2 -> bp), ``U3``
integrates bp into ``lp`` (``R7`` bp -> n3, ``C2`` n3 -> lp).  For the notch
kinds ``U4`` sums hp and lp (``R8`` hp -> n4, ``R9`` lp -> n4, ``R10`` n4 ->
output).

With ``tau1 = R6 C1``, ``tau2 = R7 C2``, ``k = R5/(R4 + R5)`` and
``S = 1 + R2/R1 + R2/R3`` (ideal op-amps, [1]_ sec. 5.3, [2]_ sec. 4.5)::

    D(s)  = tau1 tau2 s^2 + k S tau2 s + R2/R3
    HP/Vin = -(R2/R1) tau1 tau2 s^2 / D
    BP/Vin = +(R2/R1) tau2 s / D
    LP/Vin = -(R2/R1) / D
    out/Vin = (R2/R1) [(R10/R8) tau1 tau2 s^2 + R10/R9] / D      (notch kinds)

so ``w0^2 = (R2/R3)/(tau1 tau2)``, ``w0/Q = k S / tau1``, and the notch
zero ``wz^2 = w0^2 R8/R9`` when ``R2 = R3``.

Strategy ``given_gain`` (sets any gain magnitude):
``R2 = R3 = R5 = r_ref``, ``R6 = 1/(w0 C1)``, ``R7 = 1/(w0 C2)``;
lowpass/highpass ``R1 = r_ref/|g|``, ``k = 1/(Q (2 + |g|))`` (needs
``Q (2 + |g|) > 1``), output inverted; bandpass ``R1 = Q r_ref/|g|``,
``k = 1/(2 Q + |g|)`` (needs ``2 Q + |g| > 1``), non-inverting; notch kinds
``R1 = r_ref``, ``k = 1/(3 Q)`` (needs ``Q > 1/3``), ``R10 = r_ref``,
``R9 = r_ref/|g|``, ``R8 = r_ref wz^2/(|g| w0^2)``, non-inverting.

References
----------
.. [1] L. P. Huelsman, *Active and Passive Analog Filter Design*,
   McGraw-Hill, 1993, ch. 5 (state-variable biquads).
.. [2] R. Schaumann, M. E. Van Valkenburg, *Design of Analog Filters*,
   Oxford University Press, 2001, ch. 4 (KHN biquad).
.. [3] W. J. Kerwin, L. P. Huelsman, R. W. Newcomb, "State-variable
   synthesis for insensitive integrated circuit transfer functions",
   IEEE J. Solid-State Circuits SC-2 (1967) 87-92.
"""

from __future__ import annotations

import numpy as np

from service.approximation.types import SectionKind
from service.realization.topologies.base import (
    GROUND,
    NOTCH_KINDS,
    Topology,
    arr,
    capacitor,
    omega,
    omega_z,
    resistor,
)

_LP = SectionKind.LOWPASS
_HP = SectionKind.HIGHPASS
_BP = SectionKind.BANDPASS


class StateVariable(Topology):
    """KHN state-variable biquad (3 op-amps; 4 with the notch summer)."""

    name = "state_variable"
    kinds = frozenset({_LP, _HP, _BP}) | NOTCH_KINDS
    order = 2
    reference = (
        "W. J. Kerwin, L. P. Huelsman, R. W. Newcomb, IEEE J. Solid-State Circuits SC-2 (1967) 87-92; "
        "L. P. Huelsman, Active and Passive Analog Filter Design (1993), ch. 5; "
        "R. Schaumann, M. E. Van Valkenburg, Design of Analog Filters (2001), ch. 4"
    )

    def strategy_names(self, kind):
        return ("given_gain",)

    def _damping_divisor(self, section) -> float:
        """``1/k`` of the Q divider R4/R5."""
        q, g = section.q, abs(section.gain)
        if section.kind in (_LP, _HP):
            return q * (2.0 + g)
        if section.kind == _BP:
            return 2.0 * q + g
        return 3.0 * q

    def strategy_applicable(self, section, strategy):
        if not self._damping_divisor(section) > 1.0:
            need = {_LP: "Q (2 + |g|) > 1", _HP: "Q (2 + |g|) > 1", _BP: "2 Q + |g| > 1"}.get(section.kind, "Q > 1/3")
            return f"the Q divider R4/R5 needs {need} for a {section.kind.value} output (Q {section.q:g}, gain {section.gain:g})"
        return None

    def opamp_roles(self, section, strategy):
        if section.kind in NOTCH_KINDS:
            return ("U1", "U2", "U3", "U4")
        return ("U1", "U2", "U3")

    def parts(self, section, strategy):
        p = (capacitor("C1"), capacitor("C2")) + tuple(resistor(f"R{i}") for i in range(1, 8))
        if section.kind in NOTCH_KINDS:
            p = p + (resistor("R8"), resistor("R9"), resistor("R10"))
        return p

    def _sign(self, section) -> float:
        return -1.0 if section.kind in (_LP, _HP) else 1.0

    def forced_gain(self, section, strategy):
        self.check(section, strategy)
        g = self._sign(section) * abs(section.gain)
        return None if g == section.gain else g

    def _design(self, section, strategy, free, r_ref):
        w0, q, g = omega(section), section.q, abs(section.gain)
        c1, c2 = free["C1"], free["C2"]
        full = np.ones(c1.shape)
        if section.kind in (_LP, _HP):
            r1 = r_ref / g
        elif section.kind == _BP:
            r1 = q * r_ref / g
        else:
            r1 = r_ref
        inv_k = self._damping_divisor(section)
        values = {
            "C1": c1, "C2": c2, "R1": r1 * full, "R2": r_ref * full, "R3": r_ref * full,
            "R4": r_ref * (inv_k - 1.0) * full, "R5": r_ref * full,
            "R6": 1.0 / (w0 * c1), "R7": 1.0 / (w0 * c2),
        }
        if section.kind in NOTCH_KINDS:
            wz = omega_z(section)
            values["R8"] = r_ref * wz * wz / (g * w0 * w0) * full
            values["R9"] = r_ref / g * full
            values["R10"] = r_ref * full
        return values, np.zeros(c1.shape, dtype=bool)

    def polynomials(self, section, strategy, values):
        r = {i: arr(values, f"R{i}") for i in range(1, 8)}
        c1, c2 = arr(values, "C1"), arr(values, "C2")
        tau1, tau2 = r[6] * c1, r[7] * c2
        k = r[5] / (r[4] + r[5])
        s_sum = 1.0 + r[2] / r[1] + r[2] / r[3]
        den = [tau1 * tau2, k * s_sum * tau2, r[2] / r[3] + 0.0 * tau1]
        h = r[2] / r[1]
        zero = 0.0 * tau1
        if section.kind == _HP:
            num = [-h * tau1 * tau2, zero, zero]
        elif section.kind == _BP:
            num = [zero, h * tau2, zero]
        elif section.kind == _LP:
            num = [zero, zero, -h + zero]
        else:
            r8, r9, r10 = arr(values, "R8"), arr(values, "R9"), arr(values, "R10")
            num = [h * (r10 / r8) * tau1 * tau2, zero, h * (r10 / r9) + zero]
        return num, den

    def build(self, circuit, section, strategy, values, refs, *, input_node, output_node, prefix, opamp_model=None):
        self.check(section, strategy)
        names = {x: f"{prefix}_{x}" for x in ("hp", "bp", "lp", "n1", "p1", "n2", "n3", "n4")}
        if section.kind in (_LP, _HP, _BP):
            names[{_LP: "lp", _HP: "hp", _BP: "bp"}[section.kind]] = output_node
        hp, bp, lp = names["hp"], names["bp"], names["lp"]
        n1, p1, n2, n3 = names["n1"], names["p1"], names["n2"], names["n3"]
        circuit.add_resistor(refs["R1"], input_node, n1, values["R1"])
        circuit.add_resistor(refs["R2"], hp, n1, values["R2"])
        circuit.add_resistor(refs["R3"], lp, n1, values["R3"])
        circuit.add_resistor(refs["R4"], bp, p1, values["R4"])
        circuit.add_resistor(refs["R5"], p1, GROUND, values["R5"])
        circuit.add_opamp(refs["U1"], plus=p1, minus=n1, output=hp, model=opamp_model)
        circuit.add_resistor(refs["R6"], hp, n2, values["R6"])
        circuit.add_capacitor(refs["C1"], n2, bp, values["C1"])
        circuit.add_opamp(refs["U2"], plus=GROUND, minus=n2, output=bp, model=opamp_model)
        circuit.add_resistor(refs["R7"], bp, n3, values["R7"])
        circuit.add_capacitor(refs["C2"], n3, lp, values["C2"])
        circuit.add_opamp(refs["U3"], plus=GROUND, minus=n3, output=lp, model=opamp_model)
        if section.kind in NOTCH_KINDS:
            n4 = names["n4"]
            circuit.add_resistor(refs["R8"], hp, n4, values["R8"])
            circuit.add_resistor(refs["R9"], lp, n4, values["R9"])
            circuit.add_resistor(refs["R10"], n4, output_node, values["R10"])
            circuit.add_opamp(refs["U4"], plus=GROUND, minus=n4, output=output_node, model=opamp_model)


STATE_VARIABLE = StateVariable()
