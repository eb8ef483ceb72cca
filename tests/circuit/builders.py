"""Reference circuits used by the circuit-engine tests.

Every builder takes ``spread`` (relative Gaussian sigma of the R and C
values, 0 for nominal), ``trials`` and ``seed``; with ``trials > 1`` each
R, L and C value is an array of one value per trial.
"""

from __future__ import annotations

import math

import numpy as np

from service.circuit import Circuit, OpAmpModel


class _Values:
    def __init__(self, trials: int, spread: float, seed: int):
        self.rng = np.random.default_rng(seed)
        self.trials = trials
        self.spread = spread

    def __call__(self, nominal: float):
        if self.trials == 1:
            return float(nominal)
        return nominal * (1.0 + self.spread * self.rng.standard_normal(self.trials))


def rc_ladder(sections: int, r=1.6e3, c=10e-9, trials=1, spread=0.02, seed=0) -> Circuit:
    """``sections`` equal RC lowpass sections in cascade, each loading the previous one."""
    v = _Values(trials, spread, seed)
    ckt = Circuit(f"RC ladder, {sections} sections")
    ckt.add_voltage_source("VIN", "in", "0")
    prev = "in"
    for k in range(1, sections + 1):
        node = "out" if k == sections else f"n{k}"
        ckt.add_resistor(f"R{k}", prev, node, v(r))
        ckt.add_capacitor(f"C{k}", node, "0", v(c))
        prev = node
    return ckt


def series_rlc(r=100.0, l=10e-3, c=100e-9, trials=1, spread=0.02, seed=0) -> Circuit:
    """Series R-L driving C to ground; the output is across C: ``1/(LCs^2 + RCs + 1)``."""
    v = _Values(trials, spread, seed)
    ckt = Circuit("series RLC")
    ckt.add_voltage_source("VIN", "in", "0")
    ckt.add_resistor("R1", "in", "a", v(r))
    ckt.add_inductor("L1", "a", "out", v(l))
    ckt.add_capacitor("C1", "out", "0", v(c))
    return ckt


def lc_ladder_butterworth3(r=1e3, fc=10e3, trials=1, spread=0.02, seed=0) -> Circuit:
    """Doubly terminated third-order Butterworth LC ladder (shunt C, series L, shunt C), Rs = RL = r."""
    v = _Values(trials, spread, seed)
    w = 2 * math.pi * fc
    ckt = Circuit("LC ladder, Butterworth n=3")
    ckt.add_voltage_source("VIN", "in", "0")
    ckt.add_resistor("R1", "in", "a", v(r))
    ckt.add_capacitor("C1", "a", "0", v(1.0 / (w * r)))
    ckt.add_inductor("L1", "a", "out", v(2.0 * r / w))
    ckt.add_capacitor("C2", "out", "0", v(1.0 / (w * r)))
    ckt.add_resistor("R2", "out", "0", v(r))
    return ckt


def sallen_key_lowpass(model=None, f0=1e3, q=0.707, gain=1.0, trials=1, spread=0.02, seed=0) -> Circuit:
    """Sallen-Key lowpass, equal resistors; gain > 1 through a divider on the inverting input."""
    v = _Values(trials, spread, seed)
    r = 10e3
    w = 2 * math.pi * f0
    ckt = Circuit("Sallen-Key lowpass")
    ckt.add_voltage_source("VIN", "in", "0")
    if gain == 1.0:
        c1, c2 = 2 * q / (w * r), 1 / (2 * q * w * r)
    else:
        c1 = c2 = 1 / (w * r)
    ckt.add_resistor("R1", "in", "a", v(r))
    ckt.add_resistor("R2", "a", "b", v(r))
    ckt.add_capacitor("C1", "a", "out", v(c1))
    ckt.add_capacitor("C2", "b", "0", v(c2))
    if gain == 1.0:
        ckt.add_opamp("U1", "b", "out", "out", model=model)
    else:
        ckt.add_resistor("R3", "m", "0", v(10e3))
        ckt.add_resistor("R4", "out", "m", v(10e3 * (gain - 1.0)))
        ckt.add_opamp("U1", "b", "m", "out", model=model)
    return ckt


def mfb_bandpass(model=None, f0=2e3, q=5.0, trials=1, spread=0.02, seed=0) -> Circuit:
    """Multiple-feedback (Deliyannis) bandpass, equal capacitors."""
    v = _Values(trials, spread, seed)
    c = 10e-9
    w = 2 * math.pi * f0
    r3 = 2 * q / (w * c)           # feedback resistor
    r1 = r3 / 2.0                  # input resistor (gain -1 at f0 for R1 = R3/2 ... ignoring R2)
    r2 = r3 / (4 * q * q - 2)      # shunt resistor
    ckt = Circuit("MFB bandpass")
    ckt.add_voltage_source("VIN", "in", "0")
    ckt.add_resistor("R1", "in", "n1", v(r1))
    ckt.add_resistor("R2", "n1", "0", v(r2))
    ckt.add_capacitor("C1", "n1", "out", v(c))
    ckt.add_capacitor("C2", "n1", "m", v(c))
    ckt.add_resistor("R3", "m", "out", v(r3))
    ckt.add_opamp("U1", "0", "m", "out", model=model)
    return ckt


def state_variable(model=None, f0=1e3, q=2.0, trials=1, spread=0.02, seed=0, output="lp") -> Circuit:
    """Three-op-amp state-variable (KHN) biquad; ``output`` picks the lowpass, bandpass or highpass node as ``out``."""
    v = _Values(trials, spread, seed)
    r, c = 10e3, 1.0 / (2 * math.pi * f0 * 10e3)
    names = {"hp": "hp", "bp": "bp", "lp": "lp"}
    names[output] = "out"
    hp, bp, lp = names["hp"], names["bp"], names["lp"]
    ckt = Circuit("state-variable biquad")
    ckt.add_voltage_source("VIN", "in", "0")
    # summing amplifier U1: inverting input sums the input, the lowpass and its own output
    ckt.add_resistor("R1", "in", "a", v(r))
    ckt.add_resistor("R2", hp, "a", v(r))
    ckt.add_resistor("R3", lp, "a", v(r))
    # damping from the bandpass output to the non-inverting input: Q = (1 + Rb/Ra)/3 for R1 = R2 = R3
    rb = 10e3
    ra = rb / (3 * q - 1)
    ckt.add_resistor("R4", bp, "b", v(rb))
    ckt.add_resistor("R5", "b", "0", v(ra))
    ckt.add_opamp("U1", "b", "a", hp, model=model)
    # integrators U2 (hp -> bp) and U3 (bp -> lp)
    ckt.add_resistor("R6", hp, "c", v(r))
    ckt.add_capacitor("C1", "c", bp, v(c))
    ckt.add_opamp("U2", "0", "c", bp, model=model)
    ckt.add_resistor("R7", bp, "d", v(r))
    ckt.add_capacitor("C2", "d", lp, v(c))
    ckt.add_opamp("U3", "0", "d", lp, model=model)
    return ckt


def butterworth8_sallen_key(model=None, fc=1e3, trials=1, r_sigma=0.01, c_sigma=0.05, seed=0) -> Circuit:
    """Eighth-order Butterworth lowpass as four unity-gain Sallen-Key stages (the benchmark circuit)."""
    rng = np.random.default_rng(seed)
    n = 8
    r = 10e3
    w = 2 * math.pi * fc
    ckt = Circuit("Butterworth 8th order, four Sallen-Key stages")
    ckt.add_voltage_source("VIN", "in", "0")
    prev = "in"

    def val(x, sigma):
        return x if trials == 1 else x * (1.0 + sigma * rng.standard_normal(trials))

    for k in range(n // 2):
        q = 1.0 / (2.0 * math.cos(math.pi * (2 * k + 1) / (2 * n)))
        c1, c2 = 2 * q / (w * r), 1 / (2 * q * w * r)
        a, b = f"a{k + 1}", f"b{k + 1}"
        o = "out" if k == n // 2 - 1 else f"o{k + 1}"
        ckt.add_resistor(f"R{2 * k + 1}", prev, a, val(r, r_sigma))
        ckt.add_resistor(f"R{2 * k + 2}", a, b, val(r, r_sigma))
        ckt.add_capacitor(f"C{2 * k + 1}", a, o, val(c1, c_sigma))
        ckt.add_capacitor(f"C{2 * k + 2}", b, "0", val(c2, c_sigma))
        ckt.add_opamp(f"U{k + 1}", b, o, o, model=model)
        prev = o
    return ckt


def controlled_sources(trials=1, spread=0.02, seed=0) -> Circuit:
    """RC section buffered by a grounded VCVS (gain 2), a floating VCVS, and a VCCS into a load."""
    v = _Values(trials, spread, seed)
    ckt = Circuit("controlled sources")
    ckt.add_voltage_source("VIN", "in", "0")
    ckt.add_resistor("R1", "in", "a", v(10e3))
    ckt.add_capacitor("C1", "a", "0", v(10e-9))
    ckt.add_vcvs("E1", "b", "0", "a", "0", 2.0)
    ckt.add_resistor("R2", "b", "c", v(4.7e3))
    ckt.add_capacitor("C2", "c", "0", v(22e-9))
    # floating VCVS: V(d) - V(c) = 0.5 * V(b)
    ckt.add_vcvs("E2", "d", "c", "b", "0", 0.5)
    ckt.add_resistor("R3", "d", "0", v(10e3))
    # VCCS: current 1 mS * V(d) flows from out through the source to ground
    ckt.add_vccs("G1", "out", "0", "d", "0", 1e-3)
    ckt.add_resistor("R4", "out", "0", v(2.2e3))
    ckt.add_capacitor("C3", "out", "0", v(4.7e-9))
    return ckt


def loaded_macromodel(trials=1, spread=0.02, seed=0) -> Circuit:
    """Non-inverting amplifier (gain 11) of a macromodel op-amp with 75-ohm output resistance into a 1 k load."""
    v = _Values(trials, spread, seed)
    ckt = Circuit("macromodel with output resistance")
    ckt.add_voltage_source("VIN", "in", "0")
    ckt.add_resistor("R1", "in", "p", v(1e3))
    ckt.add_capacitor("C1", "p", "0", v(1e-9))
    ckt.add_resistor("R2", "m", "0", v(1e3))
    ckt.add_resistor("R3", "out", "m", v(10e3))
    ckt.add_resistor("R4", "out", "0", v(1e3))
    ckt.add_opamp("U1", "p", "m", "out", model=OpAmpModel(gbw_hz=1e6, a0=2e5, rout_ohm=75.0, name="SLOW"))
    return ckt


MACRO = OpAmpModel(gbw_hz=1e7, a0=1e5, rout_ohm=0.0, name="GENERIC")
"""A 10 MHz macromodel used across the tests."""


def catalogue(model):
    """Every reference circuit with op-amps of ``model`` (``None`` = ideal): name -> builder(trials, seed)."""
    return {
        "rc1": lambda trials=1, seed=0: rc_ladder(1, trials=trials, seed=seed),
        "rc2": lambda trials=1, seed=0: rc_ladder(2, trials=trials, seed=seed),
        "rc3": lambda trials=1, seed=0: rc_ladder(3, trials=trials, seed=seed),
        "rc4": lambda trials=1, seed=0: rc_ladder(4, trials=trials, seed=seed),
        "rlc": lambda trials=1, seed=0: series_rlc(trials=trials, seed=seed),
        "lc_ladder": lambda trials=1, seed=0: lc_ladder_butterworth3(trials=trials, seed=seed),
        "controlled": lambda trials=1, seed=0: controlled_sources(trials=trials, seed=seed),
        "sallen_key": lambda trials=1, seed=0: sallen_key_lowpass(model, trials=trials, seed=seed),
        "sallen_key_gain": lambda trials=1, seed=0: sallen_key_lowpass(model, q=1.2, gain=3.0 - 1 / 1.2,
                                                                       trials=trials, seed=seed),
        "mfb_bandpass": lambda trials=1, seed=0: mfb_bandpass(model, trials=trials, seed=seed),
        "state_variable_lp": lambda trials=1, seed=0: state_variable(model, trials=trials, seed=seed),
        "state_variable_bp": lambda trials=1, seed=0: state_variable(model, trials=trials, seed=seed, output="bp"),
        "state_variable_hp": lambda trials=1, seed=0: state_variable(model, trials=trials, seed=seed, output="hp"),
        "butterworth8": lambda trials=1, seed=0: butterworth8_sallen_key(model, trials=trials, seed=seed),
        "macro_rout": lambda trials=1, seed=0: loaded_macromodel(trials=trials, seed=seed),
    }
