"""Sallen-Key (voltage-controlled voltage source) lowpass and highpass stages.

Lowpass circuit (roles): ``R1`` input -> node a, ``R2`` a -> p (op-amp +
input), ``C1`` a -> output (the feedback capacitor), ``C2`` p -> ground.
Highpass: the same with R and C exchanged: ``C1`` input -> a, ``C2`` a -> p,
``R1`` a -> output (feedback), ``R2`` p -> ground.  The op-amp is a follower
(``unity_gain``) or a non-inverting amplifier of gain ``K = 1 + Rf/Rg``
(``Rf`` output -> n, ``Rg`` n -> ground).

Transfer functions with an ideal op-amp ([1]_ sec. 16.3.1, [2]_ ch. 5):

- lowpass  ``K / (s^2 R1 R2 C1 C2 + s [C2 (R1 + R2) + R1 C1 (1 - K)] + 1)``
- highpass ``K s^2 R1 R2 C1 C2 / (s^2 R1 R2 C1 C2 + s [R1 (C1 + C2) + R2 C2 (1 - K)] + 1)``

Strategies
----------
``unity_gain``
    Follower, gain 1.  Both capacitors free; the resistors follow from the
    two coefficient equations (a quadratic).  Lowpass ratio limit: real
    resistors need ``C1/C2 >= 4 Q^2`` ([1]_ eq. 16-17, Mancini writes it
    with his C1/C2 swapped).  Highpass: always feasible; the resistor ratio
    that results is ``R1/R2 <= 1/(4 Q^2)`` (equality for C1 = C2).
``equal_component``
    ``R1 = R2``, ``C1 = C2`` (one free capacitor), gain ``K = 3 - 1/Q``
    ([1]_ sec. 16.3.1.2); needs Q > 1/2 for ``Rf > 0``.
``given_gain``
    The section's gain ``K = |g| > 1`` through ``Rf/Rg``.  Lowpass ratio
    limit: ``C1/C2 >= 4 Q^2 / (1 + 4 Q^2 (K - 1))``; highpass: always
    feasible.  This is the only strategy that sets an arbitrary gain.

References
----------
.. [1] R. Mancini (ed.), *Op Amps for Everyone*, Texas Instruments SLOD006B,
   2002, ch. 16 "Active Filter Design Techniques" (T. Kugelstadt), also
   TI application report SLOA088.
.. [2] L. P. Huelsman, *Active and Passive Analog Filter Design*,
   McGraw-Hill, 1993, ch. 5.
"""

from __future__ import annotations

import numpy as np

from service.approximation.types import Section, SectionKind
from service.realization.topologies.base import GROUND, Topology, arr, capacitor, omega, resistor

_LP = SectionKind.LOWPASS
_HP = SectionKind.HIGHPASS


class SallenKey(Topology):
    """Sallen-Key lowpass/highpass, one op-amp, non-inverting (see module docstring)."""

    name = "sallen_key"
    kinds = frozenset({_LP, _HP})
    order = 2
    reference = (
        "R. Mancini (ed.), Op Amps for Everyone, TI SLOD006B (2002), ch. 16 (T. Kugelstadt), sec. 16.3.1 "
        "and 16.4.1; L. P. Huelsman, Active and Passive Analog Filter Design (1993), ch. 5"
    )

    def strategy_names(self, kind):
        return ("unity_gain", "equal_component", "given_gain")

    def strategy_applicable(self, section, strategy):
        if strategy == "equal_component" and section.q <= 0.5:
            return f"equal_component needs Q > 0.5 (gain 3 - 1/Q > 1), got Q = {section.q:g}"
        if strategy == "given_gain" and not abs(section.gain) > 1.0:
            return f"given_gain needs a gain magnitude above 1 (use unity_gain for gain 1), got {section.gain:g}"
        return None

    def arbitrary_gain(self, kind, strategy):
        return strategy == "given_gain"

    def opamp_roles(self, section, strategy):
        return ("U1",)

    def parts(self, section, strategy):
        if strategy == "equal_component":
            p = (capacitor("C1"), capacitor("C2", free=False), resistor("R1"), resistor("R2"))
        else:
            p = (capacitor("C1"), capacitor("C2"), resistor("R1"), resistor("R2"))
        if strategy != "unity_gain":
            p = p + (resistor("Rf"), resistor("Rg"))
        return p

    def _gain(self, section, strategy) -> float:
        if strategy == "unity_gain":
            return 1.0
        if strategy == "equal_component":
            return 3.0 - 1.0 / section.q
        return abs(section.gain)

    def forced_gain(self, section, strategy):
        self.check(section, strategy)
        if strategy == "given_gain":
            return None if section.gain > 0 else abs(section.gain)
        return self._gain(section, strategy)

    def ratio_limit(self, section, strategy):
        q = section.q
        if section.kind == _LP and strategy == "unity_gain":
            return f"unity-gain Sallen-Key lowpass needs C1/C2 >= 4 Q^2 = {4 * q * q:.6g}"
        if section.kind == _LP and strategy == "given_gain":
            k = abs(section.gain)
            return f"Sallen-Key lowpass of gain {k:g} needs C1/C2 >= 4 Q^2/(1 + 4 Q^2 (K - 1)) = {4 * q * q / (1 + 4 * q * q * (k - 1)):.6g}"
        return None

    def _design(self, section, strategy, free, r_ref):
        w0 = omega(section)
        q = section.q
        k = self._gain(section, strategy)
        c1 = free["C1"]
        if strategy == "equal_component":
            c2 = c1.copy()
            r = 1.0 / (w0 * c1)
            r1, r2 = r, r.copy()
            bad = np.zeros(c1.shape, dtype=bool)
        else:
            c2 = free["C2"]
            p = 1.0 / (w0 * w0 * c1 * c2)          # R1 R2
            b = 1.0 / (w0 * q)                       # the s coefficient
            if section.kind == _LP:
                # (C2 + C1 (1 - K)) R1^2 - b R1 + C2 P = 0, smaller root in a stable form
                alpha = c2 + c1 * (1.0 - k)
                disc = b * b - 4.0 * alpha * c2 * p
                bad = disc < 0
                r1 = 2.0 * c2 * p / (b + np.sqrt(np.where(bad, 0.0, disc)))
            else:
                # (C1 + C2) R1^2 - b R1 - C2 P (K - 1) = 0, positive root
                disc = b * b + 4.0 * (c1 + c2) * c2 * p * (k - 1.0)
                bad = np.zeros(c1.shape, dtype=bool)
                r1 = (b + np.sqrt(disc)) / (2.0 * (c1 + c2))
            r2 = p / r1
        values = {"C1": c1, "C2": c2, "R1": r1, "R2": r2}
        if strategy != "unity_gain":
            values["Rf"] = np.full(c1.shape, r_ref * (k - 1.0))
            values["Rg"] = np.full(c1.shape, r_ref)
        return values, bad

    def _k(self, strategy, values):
        if strategy == "unity_gain":
            return 1.0
        return 1.0 + arr(values, "Rf") / arr(values, "Rg")

    def polynomials(self, section, strategy, values):
        r1, r2, c1, c2 = (arr(values, x) for x in ("R1", "R2", "C1", "C2"))
        k = self._k(strategy, values)
        a2 = r1 * r2 * c1 * c2
        zero = 0.0 * a2
        one = zero + 1.0
        if section.kind == _LP:
            a1 = c2 * (r1 + r2) + r1 * c1 * (1.0 - k)
            return [zero, zero, k * one], [a2, a1, one]
        a1 = r1 * (c1 + c2) + r2 * c2 * (1.0 - k)
        return [k * a2, zero, zero], [a2, a1, one]

    def build(self, circuit, section, strategy, values, refs, *, input_node, output_node, prefix, opamp_model=None):
        self.check(section, strategy)
        a, p, n = f"{prefix}_a", f"{prefix}_p", f"{prefix}_n"
        if section.kind == _LP:
            circuit.add_resistor(refs["R1"], input_node, a, values["R1"])
            circuit.add_resistor(refs["R2"], a, p, values["R2"])
            circuit.add_capacitor(refs["C1"], a, output_node, values["C1"])
            circuit.add_capacitor(refs["C2"], p, GROUND, values["C2"])
        else:
            circuit.add_capacitor(refs["C1"], input_node, a, values["C1"])
            circuit.add_capacitor(refs["C2"], a, p, values["C2"])
            circuit.add_resistor(refs["R1"], a, output_node, values["R1"])
            circuit.add_resistor(refs["R2"], p, GROUND, values["R2"])
        if strategy == "unity_gain":
            circuit.add_opamp(refs["U1"], plus=p, minus=output_node, output=output_node, model=opamp_model)
        else:
            circuit.add_resistor(refs["Rf"], output_node, n, values["Rf"])
            circuit.add_resistor(refs["Rg"], n, GROUND, values["Rg"])
            circuit.add_opamp(refs["U1"], plus=p, minus=n, output=output_node, model=opamp_model)


SALLEN_KEY = SallenKey()

__all__ = ["SallenKey", "SALLEN_KEY"]
