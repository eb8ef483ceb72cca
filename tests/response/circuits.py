"""Small circuits built with the circuit engine for the response tests and benchmark."""

from __future__ import annotations

import math

import numpy as np
import scipy.signal as ss

from service.circuit import Circuit, OpAmpModel


def butterworth_qs(order: int) -> list[float]:
    """Pole Q of each second-order section of an even-order Butterworth lowpass.

    # source: Williams & Taylor, Electronic Filter Design Handbook, 4th ed.,
    # eq. for Butterworth poles at angles (2k-1)*pi/(2n): Q = 1/(2 cos theta_k)
    """
    return [1.0 / (2.0 * math.cos((2 * k - 1) * math.pi / (2 * order))) for k in range(1, order // 2 + 1)]


def sallen_key_lowpass(f0_hz: float, qs: list[float], r_ohm: float = 10e3, model: OpAmpModel | None = None) -> Circuit:
    """Cascade of unity-gain Sallen-Key lowpass stages (equal resistors), input VIN at ``in``, output ``out``.

    Per stage: w0 = 1/(R sqrt(C1 C2)), Q = sqrt(C1/C2)/2, so C1 = 2Q/(w0 R),
    C2 = 1/(2Q w0 R) (C1 from the middle node to the output, C2 to ground).
    """
    w0 = 2.0 * math.pi * f0_hz
    c = Circuit("sallen-key lowpass")
    c.add_voltage_source("VIN", "in", "0", ac=1.0)
    node_in = "in"
    for i, q in enumerate(qs, start=1):
        a, b = f"a{i}", f"b{i}"
        out = "out" if i == len(qs) else f"s{i}"
        c.add_resistor(f"R{2 * i - 1}", node_in, a, r_ohm)
        c.add_resistor(f"R{2 * i}", a, b, r_ohm)
        c.add_capacitor(f"C{2 * i - 1}", a, out, 2.0 * q / (w0 * r_ohm))
        c.add_capacitor(f"C{2 * i}", b, "0", 1.0 / (2.0 * q * w0 * r_ohm))
        c.add_opamp(f"U{i}", b, out, out, model)
        node_in = out
    return c


def ideal_zpk(f0_hz: float, qs: list[float]):
    """(zeros, poles, gain) rad/s of the ideal cascade of unity-gain lowpass sections."""
    w0 = 2.0 * math.pi * f0_hz
    poles = []
    for q in qs:
        poles.extend(np.roots([1.0, w0 / q, w0 * w0]))
    return np.zeros(0), np.array(poles, dtype=complex), w0 ** (2 * len(qs))


def butter_lowpass_zpk(order: int, f0_hz: float):
    # source: scipy.signal (reference library)
    return ss.lp2lp_zpk(*ss.buttap(order), 2 * math.pi * f0_hz)
