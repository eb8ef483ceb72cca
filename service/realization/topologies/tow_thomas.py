"""Tow-Thomas biquad (lossy integrator, integrator, inverter), with feed-forward for zeros.

Circuit (roles).  ``U1`` is a lossy integrator: on its inverting input n1
``C1`` n1 -> v1 and ``R2`` n1 -> v1 (damping), ``R3`` v3 -> n1 closes the
loop.  ``U2`` integrates (``R4`` v1 -> n2, ``C2`` n2 -> v2), ``U3`` inverts
(``R5`` v2 -> n3, ``R6`` n3 -> v3).  The input enters through ``R1`` to n1
(lowpass, bandpass), through ``C3`` to n1 (highpass, notch kinds) and
through ``R7`` to n2 (notch kinds): the feed-forward form of
[2]_ sec. 4.4 (from memory).

With ``m = R6/R5`` and ideal op-amps (derivation in [1]_ ch. 5 and
[2]_ sec. 4.4; absent parts count as open circuits)::

    D(s)   = C1 C2 s^2 + (C2/R2) s + m/(R3 R4)
    v1/Vin = -[C2 C3 s^2 + (C2/R1) s + m/(R3 R7)] / D
    v2/Vin = [(C3/R4 - C1/R7) s + (1/(R1 R4) - 1/(R2 R7))] / D

so ``w0^2 = m/(R3 R4 C1 C2)`` and ``w0/Q = 1/(R2 C1)``.  Outputs: lowpass
at v2 (non-inverting, gain ``R3/(m R1)``); bandpass at v1 (gain at f0
``-R2/R1``); highpass at v1 (``-C3/C1``); notch kinds at v1 (DC gain
``-R4/R7``, ``wz^2 = m/(R3 R7 C2 C3)``).

Strategy ``given_gain`` (sets any gain magnitude): ``R5 = R6 = r_ref``,
``R3 = 1/(w0 C1)``, ``R4 = 1/(w0 C2)``, ``R2 = Q/(w0 C1)``; then
``R1 = R3/|g|`` (lowpass), ``R1 = R2/|g|`` (bandpass), ``C3 = |g| C1``
(highpass), ``R7 = R4/|g|`` and ``C3 = 1/(wz^2 R3 R7 C2)`` (notch kinds).
Always feasible.

References
----------
.. [1] L. P. Huelsman, *Active and Passive Analog Filter Design*,
   McGraw-Hill, 1993, ch. 5.
.. [2] R. Schaumann, M. E. Van Valkenburg, *Design of Analog Filters*,
   Oxford University Press, 2001, sec. 4.4 (Tow-Thomas biquad).
.. [3] L. C. Thomas, "The biquad: part I - some practical design
   considerations", IEEE Trans. Circuit Theory CT-18 (1971) 350-357.
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


class TowThomas(Topology):
    """Tow-Thomas biquad, three op-amps."""

    name = "tow_thomas"
    kinds = frozenset({_LP, _HP, _BP}) | NOTCH_KINDS
    order = 2
    reference = (
        "L. C. Thomas, IEEE Trans. Circuit Theory CT-18 (1971) 350-357; "
        "R. Schaumann, M. E. Van Valkenburg, Design of Analog Filters (2001), sec. 4.4; "
        "L. P. Huelsman, Active and Passive Analog Filter Design (1993), ch. 5"
    )

    def strategy_names(self, kind):
        return ("given_gain",)

    def opamp_roles(self, section, strategy):
        return ("U1", "U2", "U3")

    def parts(self, section, strategy):
        p = (capacitor("C1"), capacitor("C2"))
        if section.kind in (_HP,) or section.kind in NOTCH_KINDS:
            p = p + (capacitor("C3", free=False),)
        if section.kind in (_LP, _BP):
            p = p + (resistor("R1"),)
        p = p + tuple(resistor(f"R{i}") for i in range(2, 7))
        if section.kind in NOTCH_KINDS:
            p = p + (resistor("R7"),)
        return p

    def forced_gain(self, section, strategy):
        self.check(section, strategy)
        g = (1.0 if section.kind == _LP else -1.0) * abs(section.gain)
        return None if g == section.gain else g

    def _design(self, section, strategy, free, r_ref):
        w0, q, g = omega(section), section.q, abs(section.gain)
        c1, c2 = free["C1"], free["C2"]
        full = np.ones(c1.shape)
        r3 = 1.0 / (w0 * c1)
        r4 = 1.0 / (w0 * c2)
        r2 = q / (w0 * c1)
        values = {"C1": c1, "C2": c2, "R2": r2, "R3": r3, "R4": r4, "R5": r_ref * full, "R6": r_ref * full}
        if section.kind == _LP:
            values["R1"] = r3 / g
        elif section.kind == _BP:
            values["R1"] = r2 / g
        elif section.kind == _HP:
            values["C3"] = g * c1
        else:
            wz = omega_z(section)
            r7 = r4 / g
            values["R7"] = r7
            values["C3"] = 1.0 / (wz * wz * r3 * r7 * c2)
        return values, np.zeros(c1.shape, dtype=bool)

    def polynomials(self, section, strategy, values):
        c1, c2 = arr(values, "C1"), arr(values, "C2")
        r2, r3, r4, r5, r6 = (arr(values, f"R{i}") for i in range(2, 7))
        m = r6 / r5
        zero = 0.0 * c1 * r2
        den = [c1 * c2 + zero, c2 / r2 + zero, m / (r3 * r4) + zero]
        g1 = 1.0 / arr(values, "R1") if section.kind in (_LP, _BP) else zero
        g7 = 1.0 / arr(values, "R7") if section.kind in NOTCH_KINDS else zero
        c3 = arr(values, "C3") if (section.kind == _HP or section.kind in NOTCH_KINDS) else zero
        if section.kind == _LP:
            num = [zero, c3 / r4 - c1 * g7, g1 / r4 - g7 / r2]
        else:
            num = [-c2 * c3, -c2 * g1, -m * g7 / r3]
        return num, den

    def build(self, circuit, section, strategy, values, refs, *, input_node, output_node, prefix, opamp_model=None):
        self.check(section, strategy)
        n1, n2, n3 = f"{prefix}_n1", f"{prefix}_n2", f"{prefix}_n3"
        v1 = output_node if section.kind != _LP else f"{prefix}_v1"
        v2 = output_node if section.kind == _LP else f"{prefix}_v2"
        v3 = f"{prefix}_v3"
        if section.kind in (_LP, _BP):
            circuit.add_resistor(refs["R1"], input_node, n1, values["R1"])
        if section.kind == _HP or section.kind in NOTCH_KINDS:
            circuit.add_capacitor(refs["C3"], input_node, n1, values["C3"])
        if section.kind in NOTCH_KINDS:
            circuit.add_resistor(refs["R7"], input_node, n2, values["R7"])
        circuit.add_capacitor(refs["C1"], n1, v1, values["C1"])
        circuit.add_resistor(refs["R2"], n1, v1, values["R2"])
        circuit.add_resistor(refs["R3"], v3, n1, values["R3"])
        circuit.add_opamp(refs["U1"], plus=GROUND, minus=n1, output=v1, model=opamp_model)
        circuit.add_resistor(refs["R4"], v1, n2, values["R4"])
        circuit.add_capacitor(refs["C2"], n2, v2, values["C2"])
        circuit.add_opamp(refs["U2"], plus=GROUND, minus=n2, output=v2, model=opamp_model)
        circuit.add_resistor(refs["R5"], v2, n3, values["R5"])
        circuit.add_resistor(refs["R6"], n3, v3, values["R6"])
        circuit.add_opamp(refs["U3"], plus=GROUND, minus=n3, output=v3, model=opamp_model)


TOW_THOMAS = TowThomas()
