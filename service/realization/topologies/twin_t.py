"""Single-op-amp twin-T notch with positive feedback (bootstrapped twin-T).

A twin-T (series ``R1``, ``R2`` with shunt leg at node a; series ``C1``,
``C2`` with shunt leg at node b) drives a follower ``U1`` whose output is
the stage output.  In the classic circuit the two shunt legs (2C and R/2)
return to a common node held at ``k`` times the output by a divider, which
raises the Q of the balanced twin-T from 1/4 to::

    Q = 1 / (4 (1 - k))         ([1]_ sec. 16.8.2 (from memory), [2]_ sec. 6.4)

and leaves the notch at ``w0 = 1/(R C)``.  Here each shunt leg is itself the
divider: its Thevenin equivalent is exactly a source ``k * out`` behind the
leg's impedance, so no buffer is needed and the one op-amp circuit is exact.

- capacitive leg at node a: ``C3`` a -> output, ``C4`` a -> ground,
  ``C3 + C4 = 2 C``, ``C3/(C3 + C4) = k``
- resistive leg at node b: ``R3`` b -> output, ``R4`` b -> ground,
  ``R3 || R4 = R/2``, ``R4/(R3 + R4) = k``

Strategy ``unity_gain`` (gain fixed at 1, the only one): free ``C1``;
``C2 = C1 = C``, ``R1 = R2 = R = 1/(w0 C)``, ``k = 1 - 1/(4 Q)``,
``R3 = R/(2 k)``, ``R4 = R/(2 (1 - k))``, ``C3 = 2 k C``, ``C4 = 2 (1 - k) C``.
It realizes ``notch`` sections (``fz = f0``) with ``Q > 1/4``, e.g. 50 Hz or
60 Hz mains rejection.

With arbitrary (snapped) part values the network is third order; the
achieved figures come from the complex pole pair and the complex zero pair
of that cubic, the DC gain from its constant terms.

References
----------
.. [1] R. Mancini (ed.), *Op Amps for Everyone*, TI SLOD006B, 2002, ch. 16,
   sec. 16.8 (band-rejection filters, active twin-T).
.. [2] A. B. Williams, F. J. Taylor, *Electronic Filter Design Handbook*,
   4th ed., McGraw-Hill, 2006, ch. 6 (band-reject filters, twin-T with
   positive feedback).
"""

from __future__ import annotations

import math

import numpy as np

from service.approximation.types import SectionKind
from service.realization.topologies.base import GROUND, TWO_PI, Topology, arr, capacitor, omega, resistor

_NOTCH = SectionKind.NOTCH


def _pmul(a: list, b: list) -> list:
    """Product of polynomials given lowest power first (lists of arrays)."""
    out = [0.0] * (len(a) + len(b) - 1)
    for i, x in enumerate(a):
        for j, y in enumerate(b):
            out[i + j] = out[i + j] + x * y
    return out


def _padd(*ps: list) -> list:
    n = max(len(p) for p in ps)
    out = [0.0] * n
    for p in ps:
        for i, x in enumerate(p):
            out[i] = out[i] + x
    return out


def _scale(p: list, c) -> list:
    return [x * c for x in p]


def _cubic_roots(coeffs: list) -> tuple[list, np.ndarray]:
    """Monic coefficients ``[p0, p1, p2]`` and roots, shape (N, 3), of cubics given lowest power first.

    Roots are the eigenvalues of the companion matrices, vectorized over N.
    """
    c0, c1, c2, c3 = np.broadcast_arrays(*(np.asarray(c, dtype=np.float64) for c in coeffs))
    p0, p1, p2 = c0 / c3, c1 / c3, c2 / c3
    comp = np.zeros((p0.shape[0], 3, 3))
    comp[:, 0, 0] = -p2
    comp[:, 0, 1] = -p1
    comp[:, 0, 2] = -p0
    comp[:, 1, 0] = 1.0
    comp[:, 2, 1] = 1.0
    return [p0, p1, p2], np.linalg.eigvals(comp)


def _deflate(monic: list, r: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """``(alpha, beta)`` with ``s^3 + p2 s^2 + p1 s + p0 = (s - r)(s^2 + alpha s + beta)``."""
    _, p1, p2 = monic
    alpha = p2 + r
    return alpha, p1 + alpha * r


def _biquad_factors(num: list, den: list):
    """Quadratic factors of numerator and denominator cubics after removing the near-cancelling real pair.

    The balanced twin-T has one real pole cancelled by a real zero; with
    arbitrary values they stay close.  The pole/zero pair nearest each other
    (of the 3 x 3 pairs) is taken as that pair; each side is deflated by its
    own root (real part).
    """
    mn, rn = _cubic_roots(num)
    md, rd = _cubic_roots(den)
    n = rd.shape[0]
    dist = np.abs(rd[:, :, None] - rn[:, None, :]).reshape(n, 9) + np.abs(rd.imag).repeat(3, axis=1) + np.abs(np.tile(rn.imag, 3))
    flat = np.argmin(dist, axis=1)
    i, j = flat // 3, flat % 3
    rows = np.arange(n)
    return _deflate(mn, rn[rows, j].real), _deflate(md, rd[rows, i].real)


class TwinTNotch(Topology):
    """Bootstrapped twin-T notch, one op-amp, gain 1."""

    name = "twin_t_notch"
    kinds = frozenset({_NOTCH})
    order = 2
    reference = (
        "R. Mancini (ed.), Op Amps for Everyone, TI SLOD006B (2002), ch. 16, sec. 16.8; "
        "A. B. Williams, F. J. Taylor, Electronic Filter Design Handbook, 4th ed. (2006), ch. 6"
    )

    def strategy_names(self, kind):
        return ("unity_gain",)

    def arbitrary_gain(self, kind, strategy):
        return False

    def strategy_applicable(self, section, strategy):
        if not section.q > 0.25:
            return f"a bootstrapped twin-T needs Q > 1/4 (divider ratio k = 1 - 1/(4Q) > 0), got Q = {section.q:g}"
        return None

    def check_section(self, section):
        super().check_section(section)
        if not math.isclose(section.fz_hz, section.f0_hz, rel_tol=1e-9):
            from service.realization.errors import UnsupportedSection

            raise UnsupportedSection(
                f"topology 'twin_t_notch' realizes notch sections with fz_hz equal to f0_hz; got fz_hz {section.fz_hz:g}, "
                f"f0_hz {section.f0_hz:g}",
                field="section.fz_hz",
            )

    def opamp_roles(self, section, strategy):
        return ("U1",)

    def parts(self, section, strategy):
        return (capacitor("C1"), capacitor("C2", free=False), capacitor("C3", free=False), capacitor("C4", free=False),
                resistor("R1"), resistor("R2"), resistor("R3"), resistor("R4"))

    def forced_gain(self, section, strategy):
        self.check(section, strategy)
        return 1.0

    def _design(self, section, strategy, free, r_ref):
        c = free["C1"]
        r = 1.0 / (omega(section) * c)
        k = 1.0 - 1.0 / (4.0 * section.q)
        return {"C1": c, "C2": c.copy(), "C3": 2.0 * k * c, "C4": 2.0 * (1.0 - k) * c,
                "R1": r, "R2": r.copy(), "R3": r / (2.0 * k), "R4": r / (2.0 * (1.0 - k))}, np.zeros(c.shape, dtype=bool)

    def polynomials(self, section, strategy, values):
        """Cubic ``(num, den)`` of out/Vin, highest power first (a balanced twin-T cancels one real root)."""
        c1, c2, c3, c4 = (arr(values, f"C{i}") for i in range(1, 5))
        g1, g2, g3, g4 = (1.0 / arr(values, f"R{i}") for i in range(1, 5))
        ya = [g1 + g2, c3 + c4]            # lowest power first
        yb = [g3 + g4, c1 + c2]
        num = _padd(_scale(yb, g1 * g2), _pmul([0.0, 0.0, c1 * c2], ya))
        den = _padd(_pmul(_pmul([g2, c2], ya), yb), _scale(_pmul([g2, c3], yb), -g2),
                    _scale(_pmul(_pmul([0.0, c2], [g3, c2]), ya), -1.0))
        shape = np.broadcast(*(np.asarray(x) for x in num + den)).shape
        num = [np.broadcast_to(np.asarray(x), shape) for x in num]
        den = [np.broadcast_to(np.asarray(x), shape) for x in den]
        return num[::-1], den[::-1]

    def achieved(self, section, strategy, values):
        self.check(section, strategy)
        num, den = self.polynomials(section, strategy, values)
        num, den = num[::-1], den[::-1]
        (az, bz), (a, b) = _biquad_factors(num, den)
        w0 = np.sqrt(b)
        return {"f0_hz": w0 / TWO_PI, "q": w0 / a, "gain": num[0] / den[0], "fz_hz": np.sqrt(bz) / TWO_PI,
                "zero_damping": az / (2.0 * np.sqrt(bz))}

    def sensitivities(self, section, strategy, values):
        """Normalized sensitivities by a fourth-order central difference of :meth:`achieved`.

        The cubic's roots are not an explicit formula, so the complex step of
        the base class does not apply; steps of ``x (1 +- h)``, ``x (1 +- 2h)``
        with ``h = 1e-4`` give an error of order ``h^4``.
        """
        self.check(section, strategy)
        base = {k: float(np.asarray(v).reshape(-1)[0]) for k, v in values.items()}
        roles = [p.role for p in self.parts(section, strategy)]
        h = 1e-4
        steps = np.array([-2.0, -1.0, 1.0, 2.0]) * h
        batch = {k: np.full(4 * len(roles) + 1, v) for k, v in base.items()}
        for i, role in enumerate(roles):
            batch[role][1 + 4 * i: 5 + 4 * i] = base[role] * (1.0 + steps)
        a = self.achieved(section, strategy, batch)
        f0, q = a["f0_hz"], a["q"]
        out = {}
        for i, role in enumerate(roles):
            sl = slice(1 + 4 * i, 5 + 4 * i)
            df = (f0[sl][0] - 8 * f0[sl][1] + 8 * f0[sl][2] - f0[sl][3]) / (12 * h)
            dq = (q[sl][0] - 8 * q[sl][1] + 8 * q[sl][2] - q[sl][3]) / (12 * h)
            out[role] = (float(df / f0[0]), float(dq / q[0]))
        return out

    def build(self, circuit, section, strategy, values, refs, *, input_node, output_node, prefix, opamp_model=None):
        self.check(section, strategy)
        a, b, t = f"{prefix}_a", f"{prefix}_b", f"{prefix}_t"
        circuit.add_resistor(refs["R1"], input_node, a, values["R1"])
        circuit.add_resistor(refs["R2"], a, t, values["R2"])
        circuit.add_capacitor(refs["C3"], a, output_node, values["C3"])
        circuit.add_capacitor(refs["C4"], a, GROUND, values["C4"])
        circuit.add_capacitor(refs["C1"], input_node, b, values["C1"])
        circuit.add_capacitor(refs["C2"], b, t, values["C2"])
        circuit.add_resistor(refs["R3"], b, output_node, values["R3"])
        circuit.add_resistor(refs["R4"], b, GROUND, values["R4"])
        circuit.add_opamp(refs["U1"], plus=t, minus=output_node, output=output_node, model=opamp_model)


TWIN_T_NOTCH = TwinTNotch()
