"""Batched zeros, poles and gain (service.circuit.roots) against a full MNA solve, the QZ roots, and closed forms."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import signal

from service.circuit import Circuit, OpAmpModel, ac_response, transfer_function_zpk
from service.circuit.roots import RootSet, transfer_roots
from tests.circuit.builders import MACRO, catalogue, sallen_key_lowpass, state_variable

F = np.logspace(0.5, 6, 121)
SINGLE_STAGE = ("rc1", "rc2", "rlc", "controlled", "sallen_key", "sallen_key_gain", "mfb_bandpass",
                "state_variable_lp", "state_variable_bp", "state_variable_hp", "macro_rout")


@pytest.mark.parametrize("model", [None, MACRO], ids=["ideal", "macromodel"])
@pytest.mark.parametrize("name", SINGLE_STAGE)
def test_root_magnitude_matches_a_full_mna_solve(name, model):
    # the full batched MNA solve (numpy.linalg.solve per frequency) is the method of Ho, Ruehli and Brennan,
    # independent of the eigenvalue route
    circuit = catalogue(model)[name](trials=5, seed=3)
    want = np.log(np.abs(ac_response(circuit, F, method="full")))
    got = transfer_roots(circuit).log_magnitude(2 * np.pi * F)
    assert np.max(np.abs(got - want)) * 20 / math.log(10) < 1e-9


@pytest.mark.parametrize("name", ["sallen_key", "mfb_bandpass", "state_variable_lp", "state_variable_hp"])
def test_poles_of_each_trial_match_the_qz_roots(name):
    circuit = catalogue(MACRO)[name](trials=4, seed=1)
    roots = transfer_roots(circuit)
    for t in range(4):
        _, p, _ = transfer_function_zpk(circuit.trial(t))
        got = roots.poles[t][np.isfinite(roots.poles[t])]
        # the batched poles are every natural frequency (no cancellation): each QZ pole is among them
        for want in p:
            assert np.min(np.abs(got - want)) <= 1e-7 * abs(want)


def test_sallen_key_poles_against_the_closed_form():
    # source: the unity-gain Sallen-Key lowpass s^2 + s (1/(R1 C1) + 1/(R2 C1)) + 1/(R1 R2 C1 C2) (ideal op-amp);
    # e.g. Huelsman and Allen, Introduction to the Theory and Design of Active Filters, 1980, ch. 4 (from memory)
    c = Circuit()
    c.add_voltage_source("VIN", "in", "0")
    r1, r2, c1, c2 = 10e3, 22e3, 10e-9, 3.3e-9
    c.add_resistor("R1", "in", "a", r1)
    c.add_resistor("R2", "a", "p", r2)
    c.add_capacitor("C1", "a", "out", c1)
    c.add_capacitor("C2", "p", "0", c2)
    c.add_opamp("U1", "p", "out", "out")
    roots = transfer_roots(c)
    want = np.roots([1.0, 1 / (r1 * c1) + 1 / (r2 * c1), 1 / (r1 * r2 * c1 * c2)])
    got = np.sort_complex(roots.poles[0])
    np.testing.assert_allclose(got, np.sort_complex(want), rtol=1e-12)
    assert roots.zeros.shape[1] == 0
    assert roots.log_gain[0] == pytest.approx(math.log(1 / (r1 * r2 * c1 * c2)), rel=1e-12)


def test_finite_gain_bandwidth_pushes_a_two_integrator_loop_unstable():
    # source: the Q enhancement of a two-integrator loop with op-amps of unity-gain frequency wt,
    # Q_a ~ Q / (1 - 2 Q w0 / wt): R. Schaumann and M. E. Van Valkenburg, Design of Analog Filters, Oxford, 2001,
    # sec. on the KHN/Tow-Thomas biquads (from memory). With Q = 40 at 5 kHz the loop needs wt > 2 Q w0 = 400 kHz:
    # at 10 MHz it is stable, at 200 kHz a pole pair lies in the right half-plane.
    fast = transfer_roots(state_variable(OpAmpModel(gbw_hz=1e7, a0=1e5), f0=5e3, q=40.0))
    slow = transfer_roots(state_variable(OpAmpModel(gbw_hz=2e5, a0=1e5), f0=5e3, q=40.0))
    assert not fast.unstable()[0]
    assert slow.unstable()[0]
    assert np.max(slow.poles[0].real) > 0


def test_reciprocal_keeps_the_magnitude():
    # source: scipy.signal (reference library) -- an elliptic highpass, |H(j w)| against |H'(j/w)|
    z, p, k = signal.ellip(5, 0.5, 40, 2 * np.pi * 1e3, btype="highpass", analog=True, output="zpk")
    rs = RootSet.from_zpk(z, p, k)
    w = np.geomspace(10, 1e6, 50)
    np.testing.assert_allclose(rs.reciprocal().log_magnitude(1 / w), rs.log_magnitude(w), atol=1e-11)


def test_cascade_multiplies_the_stages():
    a = transfer_roots(sallen_key_lowpass(None, f0=1e3, q=0.7))
    b = transfer_roots(sallen_key_lowpass(MACRO, f0=3e3, q=2.0, gain=2.5))
    both = RootSet.cascade([a, b])
    w = np.geomspace(100, 1e5, 30)
    np.testing.assert_allclose(both.log_magnitude(w), a.log_magnitude(w) + b.log_magnitude(w), atol=1e-12)
    assert list(both.pole_group) == [0] * a.poles.shape[1] + [1] * b.poles.shape[1]


def test_sallen_key_poles_with_a_single_pole_opamp_against_the_closed_form():
    # source: the nodal equations of the unity-gain Sallen-Key lowpass with a single-pole op-amp
    # A(s) = wt / (s + wt/a0): with B = R1 C1 + R2 C2 + R1 C2 and T = R1 R2 C1 C2 the poles are the roots of
    # (s + wt + wt/a0)(1 + s B + s^2 T) - s R1 C1 wt -- the cubic of the finite-GBW analysis of the section in
    # L. P. Huelsman, Active and Passive Analog Filter Design, McGraw-Hill, 1993, ch. on op-amp effects
    # (from memory; re-derived here from the nodal equations)
    r1, r2, c1, c2 = 10e3, 22e3, 10e-9, 3.3e-9
    gbw, a0 = 1e6, 1e5
    wt = 2 * math.pi * gbw
    c = Circuit()
    c.add_voltage_source("VIN", "in", "0")
    c.add_resistor("R1", "in", "a", r1)
    c.add_resistor("R2", "a", "p", r2)
    c.add_capacitor("C1", "a", "out", c1)
    c.add_capacitor("C2", "p", "0", c2)
    c.add_opamp("U1", "p", "out", "out", OpAmpModel(gbw_hz=gbw, a0=a0))
    b, t = r1 * c1 + r2 * c2 + r1 * c2, r1 * r2 * c1 * c2
    w = wt + wt / a0
    cubic = [t, b + w * t, 1 + w * b - r1 * c1 * wt, w]
    want = np.roots(cubic)
    got = transfer_roots(c).poles[0]
    assert got.size == want.size == 3
    for w in want:
        assert np.min(np.abs(got - w)) <= 1e-9 * abs(w)
