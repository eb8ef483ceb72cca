"""Single-amplifier notch sections: the Delyiannis-Friend biquad with input feed-forward.

One op-amp realizes the ``notch``, ``lowpass_notch`` (``fz > f0``) and
``highpass_notch`` (``fz < f0``) kinds.  The core is the Delyiannis-Friend
bandpass [1]_ [2]_ with its Q raised by positive feedback to the
non-inverting input [1]_ [3]_; the input is fed forward into the networks of
both op-amp inputs, which places the transmission zeros on the j-axis at any
frequency [4]_ (the input-distribution technique of [3]_ ch. 5).

Circuit (roles; a, n, p are the stage's internal nodes, n the inverting and
p the non-inverting input of ``U1``)::

    R1  input -> a        C1  a -> output       C2  a -> n       R2  n -> output
    R3  a -> ground       (only when the gain is below the maximum)
    R4  n -> ground       (lowpass_notch)  or  input -> n  (highpass_notch); none for notch
    R5  output -> p       (positive feedback; only when Q > Q0_MAX)
    R6  p -> ground       R7  input -> p

With conductances ``Gi = 1/Ri``, ``Gt = G1 + G3``, the divider ratios
``k = G5/Gp``, ``m = G7/Gp`` (``Gp = G5 + G6 + G7``), ``a = 1`` when R4
returns to the input and 0 when it returns to ground, node analysis with an
ideal op-amp (``V(n) = V(p) = k Vout + m Vin``) gives, derived for this
module and checked against the circuit engine and ngspice in the tests::

    D(s) = (1-k) C1 C2 s^2 + [(1-k) G2 (C1+C2) - k (C1 G4 + C2 (Gt + G4))] s + Gt [(1-k) G2 - k G4]
    N(s) = m C1 C2 s^2 + [m (C1 (G2+G4) + C2 (Gt+G2+G4)) - a G4 (C1+C2) - C2 G1] s + Gt [m (G2+G4) - a G4]
    Vout/Vin = N(s) / D(s)                         (non-inverting)

Design equations (strategy ``given_gain``; derived here from ``N`` and ``D``
with equal capacitors ``C1 = C2 = C``, ``rho = wz^2/w0^2``, and the passive
Q of the core ``Q0 = min(Q, Q0_MAX)``)::

    kappa = k/(1-k) = (1 - Q0/Q) / (2 Q0^2)
    Gt = 2 Q0 w0 C,   X = w0 C / (2 Q0)
    mu = 1/m = (1 + rho/(2 Q0^2)) / beta,  beta = G1/Gt
    lowpass_notch:  G4 = X (rho - 1)/(1 + kappa)         (R4 to ground)
    highpass_notch: G4 = X (1 - rho)/(mu - 1 - kappa)     (R4 from the input)
    G2 = X + kappa G4,  G5 : G6 : G7 = k : (1-k-m) : m,  G5 + G6 + G7 = 1/r_ref

which cancel the ``s`` term of ``N`` (the zeros lie on the j-axis) and give
``w0``, ``Q``, ``wz`` and the DC gain ``g = beta (1 + kappa) rho / (1 + rho/(2 Q0^2))``.
``beta = 1`` gives the largest gain; a smaller gain takes ``beta < 1``
(``R3``).  The high-frequency gain ``g/rho = m/(1-k)`` is below 1 for
every kind (the divider is passive); the highpass notch keeps it at most
:data:`HPN_MAX_HF_GAIN` (R4 grows without bound as it nears 1).

Strategies: ``given_gain`` (the section's gain magnitude, within the bounds
above) and ``maximum_gain`` (``beta = 1``; highpass notch at
:data:`HPN_MAX_HF_GAIN`), each with the sign +1.

References
----------
.. [1] T. Deliyannis, "High-Q factor circuit with reduced sensitivity",
   Electronics Letters 4 (1968) 577-579 (from memory).
.. [2] J. J. Friend, "A single operational-amplifier biquadratic filter
   section", IEEE Int. Symp. Circuit Theory, 1970, 179-180 (from memory).
.. [3] R. Schaumann, M. E. Van Valkenburg, *Design of Analog Filters*,
   Oxford University Press, 2001, ch. 5 (single-amplifier biquads, the
   Delyiannis-Friend circuit, Q enhancement, feeding the input to several
   nodes) (from memory).
.. [4] J. J. Friend, C. A. Harris, D. Hilberman, "STAR: an active
   biquadratic filter section", IEEE Trans. Circuits and Systems CAS-22
   (1975) 115-121 (from memory).
"""

from __future__ import annotations

import numpy as np

from service.approximation.types import Section, SectionKind
from service.realization.topologies.base import GROUND, NOTCH_KINDS, Topology, arr, capacitor, omega, omega_z, resistor

_NOTCH = SectionKind.NOTCH
_LPN = SectionKind.LOWPASS_NOTCH
_HPN = SectionKind.HIGHPASS_NOTCH

#: Largest Q the passive core provides alone; the rest comes from positive feedback.
#: common practice (no source): a Delyiannis-Friend core of Q0 has a resistor spread
#: near 4 Q0^2 with equal capacitors (36 at Q0 = 3); Q enhancement by a small
#: positive feedback keeps the spread there (Schaumann & Van Valkenburg [3]_, ch. 5, from memory).
Q0_MAX = 3.0
#: Highest high-frequency gain of the highpass notch (R4 tends to zero as it nears 1).
#: common practice (no source): keeps R4 within a factor of about 10 of R2.
HPN_MAX_HF_GAIN = 0.9
#: Relative tolerance under which beta counts as 1 (R3 left out).
_BETA_ONE = 1e-9


def _q0(q: float) -> float:
    return min(q, Q0_MAX)


def _kappa(q: float) -> float:
    q0 = _q0(q)
    return (1.0 - q0 / q) / (2.0 * q0 * q0)


def _rho(section: Section) -> float:
    return (float(section.fz_hz) / section.f0_hz) ** 2


def max_gain(section: Section) -> float:
    """Largest DC gain (standard form) the section allows (see module docstring)."""
    q, rho = section.q, _rho(section)
    q0 = _q0(q)
    full = (1.0 + _kappa(q)) * rho / (1.0 + rho / (2.0 * q0 * q0))
    if section.kind == _HPN:
        return min(full, HPN_MAX_HF_GAIN * rho)
    return full


def _beta(section: Section, strategy: str) -> float:
    """Input attenuation ``beta = G1/Gt`` of the strategy."""
    q, rho = section.q, _rho(section)
    q0 = _q0(q)
    full = (1.0 + _kappa(q)) * rho / (1.0 + rho / (2.0 * q0 * q0))
    g = max_gain(section) if strategy == "maximum_gain" else abs(section.gain)
    return g / full


class DelyiannisFriendNotch(Topology):
    """Delyiannis-Friend single-amplifier notch / lowpass-notch / highpass-notch (see module docstring)."""

    name = "delyiannis_friend_notch"
    kinds = NOTCH_KINDS
    order = 2
    reference = (
        "T. Deliyannis, Electronics Letters 4 (1968) 577-579; J. J. Friend, IEEE ISCT 1970, 179-180; "
        "J. J. Friend, C. A. Harris, D. Hilberman, IEEE Trans. CAS-22 (1975) 115-121; "
        "R. Schaumann, M. E. Van Valkenburg, Design of Analog Filters (2001), ch. 5; "
        "design equations derived for rolloff (module docstring)"
    )

    def strategy_names(self, kind):
        return ("given_gain", "maximum_gain")

    def strategy_applicable(self, section, strategy):
        if section.kind == _NOTCH and not np.isclose(section.fz_hz, section.f0_hz, rtol=1e-9):
            return "a notch section needs fz_hz equal to f0_hz"
        if section.kind == _LPN and not section.fz_hz > section.f0_hz:
            return f"a lowpass_notch section needs fz_hz above f0_hz, got fz {section.fz_hz:g} Hz, f0 {section.f0_hz:g} Hz"
        if section.kind == _HPN and not section.fz_hz < section.f0_hz:
            return f"a highpass_notch section needs fz_hz below f0_hz, got fz {section.fz_hz:g} Hz, f0 {section.f0_hz:g} Hz"
        if strategy == "given_gain" and abs(section.gain) > max_gain(section) * (1 + 1e-12):
            return (f"given_gain reaches a DC gain of at most {max_gain(section):.6g} for this section "
                    f"(Q {section.q:g}, fz/f0 {section.fz_hz / section.f0_hz:.6g}), asked {abs(section.gain):g}")
        return None

    def arbitrary_gain(self, kind, strategy):
        return strategy == "given_gain"

    def opamp_roles(self, section, strategy):
        return ("U1",)

    def parts(self, section, strategy):
        p = [capacitor("C1"), capacitor("C2", free=False), resistor("R1")]
        if _beta(section, strategy) < 1.0 - _BETA_ONE:
            p.append(resistor("R3"))
        p.append(resistor("R2"))
        if section.kind != _NOTCH:
            p.append(resistor("R4"))
        if _kappa(section.q) > 0:
            p.append(resistor("R5"))
        p += [resistor("R6"), resistor("R7")]
        return tuple(p)

    def forced_gain(self, section, strategy):
        self.check(section, strategy)
        if strategy == "maximum_gain":
            return max_gain(section)
        return None if section.gain > 0 else abs(section.gain)

    def _design(self, section, strategy, free, r_ref):
        c = free["C1"]
        w0, q = omega(section), section.q
        rho = (omega_z(section) / w0) ** 2
        q0 = _q0(q)
        kappa = _kappa(q)
        beta = _beta(section, strategy)
        gt = 2.0 * q0 * w0 * c
        x = w0 * c / (2.0 * q0)
        mu = (1.0 + rho / (2.0 * q0 * q0)) / beta
        m = 1.0 / mu
        k = kappa / (1.0 + kappa)
        values = {"C1": c, "C2": c.copy()}
        g1 = beta * gt
        values["R1"] = 1.0 / g1
        if "R3" in {p.role for p in self.parts(section, strategy)}:
            values["R3"] = 1.0 / (gt - g1)
        if section.kind == _LPN:
            g4 = x * (rho - 1.0) / (1.0 + kappa)
        elif section.kind == _HPN:
            g4 = x * (1.0 - rho) / (mu - 1.0 - kappa)
        else:
            g4 = 0.0 * x
        g2 = x + kappa * g4
        values["R2"] = 1.0 / g2
        if section.kind != _NOTCH:
            values["R4"] = 1.0 / g4
        gp = 1.0 / r_ref
        full = np.ones(c.shape)
        if kappa > 0:
            values["R5"] = full / (k * gp)
        values["R6"] = full / ((1.0 - k - m) * gp)
        values["R7"] = full / (m * gp)
        bad = np.zeros(c.shape, dtype=bool) | (1.0 - k - m <= 0)
        return values, bad

    def polynomials(self, section, strategy, values):
        c1, c2 = arr(values, "C1"), arr(values, "C2")
        g1, g2 = 1.0 / arr(values, "R1"), 1.0 / arr(values, "R2")
        zero = 0.0 * (c1 * g1)
        g3 = 1.0 / arr(values, "R3") if "R3" in values else zero
        g4 = 1.0 / arr(values, "R4") if (section.kind != _NOTCH and "R4" in values) else zero
        g5 = 1.0 / arr(values, "R5") if "R5" in values else zero
        g6, g7 = 1.0 / arr(values, "R6"), 1.0 / arr(values, "R7")
        a = 1.0 if section.kind == _HPN else 0.0
        gp = g5 + g6 + g7
        k, m = g5 / gp, g7 / gp
        gt = g1 + g3
        sig = c1 + c2
        den = [(1.0 - k) * c1 * c2,
               (1.0 - k) * g2 * sig - k * (c1 * g4 + c2 * (gt + g4)),
               gt * ((1.0 - k) * g2 - k * g4)]
        num = [m * c1 * c2,
               m * (c1 * (g2 + g4) + c2 * (gt + g2 + g4)) - a * g4 * sig - c2 * g1,
               gt * (m * (g2 + g4) - a * g4)]
        return num, den

    def build(self, circuit, section, strategy, values, refs, *, input_node, output_node, prefix, opamp_model=None):
        self.check(section, strategy)
        a, n, p = f"{prefix}_a", f"{prefix}_n", f"{prefix}_p"
        circuit.add_resistor(refs["R1"], input_node, a, values["R1"])
        if "R3" in refs and "R3" in values:
            circuit.add_resistor(refs["R3"], a, GROUND, values["R3"])
        circuit.add_capacitor(refs["C1"], a, output_node, values["C1"])
        circuit.add_capacitor(refs["C2"], a, n, values["C2"])
        circuit.add_resistor(refs["R2"], n, output_node, values["R2"])
        if section.kind == _LPN:
            circuit.add_resistor(refs["R4"], n, GROUND, values["R4"])
        elif section.kind == _HPN:
            circuit.add_resistor(refs["R4"], input_node, n, values["R4"])
        if "R5" in refs and "R5" in values:
            circuit.add_resistor(refs["R5"], output_node, p, values["R5"])
        circuit.add_resistor(refs["R6"], p, GROUND, values["R6"])
        circuit.add_resistor(refs["R7"], input_node, p, values["R7"])
        circuit.add_opamp(refs["U1"], plus=p, minus=n, output=output_node, model=opamp_model)


DELYIANNIS_FRIEND_NOTCH = DelyiannisFriendNotch()

__all__ = ["DelyiannisFriendNotch", "DELYIANNIS_FRIEND_NOTCH", "Q0_MAX", "HPN_MAX_HF_GAIN", "max_gain"]
