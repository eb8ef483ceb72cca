"""Multiple-feedback (infinite-gain, Rauch) lowpass, highpass and bandpass stages.

All three are inverting (gain ``-|g|``, any magnitude within the ratio
limits below) and use one op-amp with its non-inverting input grounded; n is
the inverting input, a the node where the feedback paths meet.  Strategy
``given_gain`` (the only one; it sets the section's gain magnitude).

Lowpass: ``R1`` input -> a, ``C1`` a -> ground, ``R2`` a -> output,
``R3`` a -> n, ``C2`` n -> output::

    H = -(R2/R1) / (1 + s C2 (R2 + R3 + R2 R3/R1) + s^2 C1 C2 R2 R3)

Free C1, C2; real resistors need ``C1/C2 >= 4 Q^2 (1 + |g|)`` ([1]_ eq. 16-25,
with Mancini's C1/C2 swapped).

Highpass: ``C1`` input -> a, ``R1`` a -> ground, ``C3`` a -> output,
``C2`` a -> n, ``R2`` n -> output::

    H = -s^2 R1 R2 C1 C2 / (1 + s R1 (C1 + C2 + C3) + s^2 R1 R2 C2 C3)

Free C2, C3; ``C1 = |g| C3``; always feasible ([1]_ sec. 16.4.2).

Bandpass: ``R1`` input -> a, ``R2`` a -> ground, ``C1`` a -> output,
``C2`` a -> n, ``R3`` n -> output::

    H = -s C2 R3/R1 / (s^2 C1 C2 R3 + s (C1 + C2) + 1/R1 + 1/R2)

Gain at f0 ``-R3 C2/(R1 (C1 + C2))``.  Free C1, C2; ``R2 > 0`` needs
``|g| < Q^2 (1 + C2/C1)`` (``|g| < 2 Q^2`` with equal capacitors, [1]_
sec. 16.5.2, [2]_ sec. 6.2).

References
----------
.. [1] R. Mancini (ed.), *Op Amps for Everyone*, TI SLOD006B, 2002, ch. 16
   (T. Kugelstadt), sec. 16.3.1.3, 16.4.2, 16.5.2.
.. [2] A. B. Williams, F. J. Taylor, *Electronic Filter Design Handbook*,
   4th ed., McGraw-Hill, 2006, ch. 3 and 5 (MFB lowpass and bandpass).
"""

from __future__ import annotations

import numpy as np

from service.approximation.types import SectionKind
from service.realization.topologies.base import GROUND, Topology, arr, capacitor, omega, resistor

_LP = SectionKind.LOWPASS
_HP = SectionKind.HIGHPASS
_BP = SectionKind.BANDPASS


class MultipleFeedback(Topology):
    """Multiple-feedback lowpass/highpass/bandpass, one op-amp, inverting."""

    name = "multiple_feedback"
    kinds = frozenset({_LP, _HP, _BP})
    order = 2
    reference = (
        "R. Mancini (ed.), Op Amps for Everyone, TI SLOD006B (2002), ch. 16 (T. Kugelstadt), sec. 16.3.1.3, "
        "16.4.2, 16.5.2; A. B. Williams, F. J. Taylor, Electronic Filter Design Handbook, 4th ed. (2006), ch. 3, 5"
    )

    def strategy_names(self, kind):
        return ("given_gain",)

    def opamp_roles(self, section, strategy):
        return ("U1",)

    def parts(self, section, strategy):
        if section.kind == _HP:
            return (capacitor("C2"), capacitor("C3"), capacitor("C1", free=False), resistor("R1"), resistor("R2"))
        return (capacitor("C1"), capacitor("C2"), resistor("R1"), resistor("R2"), resistor("R3"))

    def forced_gain(self, section, strategy):
        self.check(section, strategy)
        return -abs(section.gain)

    def ratio_limit(self, section, strategy):
        q, k = section.q, abs(section.gain)
        if section.kind == _LP:
            return f"multiple-feedback lowpass of gain {k:g} needs C1/C2 >= 4 Q^2 (1 + |g|) = {4 * q * q * (1 + k):.6g}"
        if section.kind == _BP:
            return f"multiple-feedback bandpass of gain {k:g} needs |g| < Q^2 (1 + C2/C1), i.e. C2/C1 > {k / (q * q) - 1:.6g}"
        return None

    def _design(self, section, strategy, free, r_ref):
        w0, q, k = omega(section), section.q, abs(section.gain)
        if section.kind == _LP:
            c1, c2 = free["C1"], free["C2"]
            p = 1.0 / (w0 * w0 * c1 * c2)                 # R2 R3
            b = 1.0 / (w0 * q)
            # C2 R2^2 - b R2 + C2 (1 + K) P = 0, smaller root (Mancini's choice)
            disc = b * b - 4.0 * c2 * c2 * (1.0 + k) * p
            bad = disc < 0
            r2 = 2.0 * c2 * (1.0 + k) * p / (b + np.sqrt(np.where(bad, 0.0, disc)))
            return {"C1": c1, "C2": c2, "R1": r2 / k, "R2": r2, "R3": p / r2}, bad
        if section.kind == _HP:
            c2, c3 = free["C2"], free["C3"]
            c1 = k * c3
            r2 = q * (c1 + c2 + c3) / (w0 * c2 * c3)
            r1 = 1.0 / (w0 * w0 * r2 * c2 * c3)
            return {"C1": c1, "C2": c2, "C3": c3, "R1": r1, "R2": r2}, np.zeros(c2.shape, dtype=bool)
        c1, c2 = free["C1"], free["C2"]
        r3 = q * (c1 + c2) / (w0 * c1 * c2)
        r1 = r3 * c2 / (k * (c1 + c2))
        g2 = w0 * w0 * c1 * c2 * r3 - 1.0 / r1
        bad = g2 <= 0
        r2 = 1.0 / np.where(bad, 1.0, g2)
        return {"C1": c1, "C2": c2, "R1": r1, "R2": r2, "R3": r3}, bad

    def polynomials(self, section, strategy, values):
        if section.kind == _LP:
            r1, r2, r3, c1, c2 = (arr(values, x) for x in ("R1", "R2", "R3", "C1", "C2"))
            zero = 0.0 * r1
            return [zero, zero, -r2 / r1], [c1 * c2 * r2 * r3, c2 * (r2 + r3 + r2 * r3 / r1), zero + 1.0]
        if section.kind == _HP:
            r1, r2, c1, c2, c3 = (arr(values, x) for x in ("R1", "R2", "C1", "C2", "C3"))
            zero = 0.0 * r1
            return [-r1 * r2 * c1 * c2, zero, zero], [r1 * r2 * c2 * c3, r1 * (c1 + c2 + c3), zero + 1.0]
        r1, r2, r3, c1, c2 = (arr(values, x) for x in ("R1", "R2", "R3", "C1", "C2"))
        zero = 0.0 * r1
        return [zero, -c2 * r3 / r1, zero], [c1 * c2 * r3, c1 + c2, 1.0 / r1 + 1.0 / r2]

    def build(self, circuit, section, strategy, values, refs, *, input_node, output_node, prefix, opamp_model=None):
        self.check(section, strategy)
        a, n = f"{prefix}_a", f"{prefix}_n"
        if section.kind == _LP:
            circuit.add_resistor(refs["R1"], input_node, a, values["R1"])
            circuit.add_capacitor(refs["C1"], a, GROUND, values["C1"])
            circuit.add_resistor(refs["R2"], a, output_node, values["R2"])
            circuit.add_resistor(refs["R3"], a, n, values["R3"])
            circuit.add_capacitor(refs["C2"], n, output_node, values["C2"])
        elif section.kind == _HP:
            circuit.add_capacitor(refs["C1"], input_node, a, values["C1"])
            circuit.add_resistor(refs["R1"], a, GROUND, values["R1"])
            circuit.add_capacitor(refs["C3"], a, output_node, values["C3"])
            circuit.add_capacitor(refs["C2"], a, n, values["C2"])
            circuit.add_resistor(refs["R2"], n, output_node, values["R2"])
        else:
            circuit.add_resistor(refs["R1"], input_node, a, values["R1"])
            circuit.add_resistor(refs["R2"], a, GROUND, values["R2"])
            circuit.add_capacitor(refs["C1"], a, output_node, values["C1"])
            circuit.add_capacitor(refs["C2"], a, n, values["C2"])
            circuit.add_resistor(refs["R3"], n, output_node, values["R3"])
        circuit.add_opamp(refs["U1"], plus=GROUND, minus=n, output=output_node, model=opamp_model)


MULTIPLE_FEEDBACK = MultipleFeedback()
