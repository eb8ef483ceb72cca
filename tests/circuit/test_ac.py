"""AC analysis: closed forms of the trade, fast path == full solve, chunking, options."""

from __future__ import annotations

import math

import numpy as np
import pytest

from service.circuit import Circuit, CircuitError, OpAmpModel, ac_response
from service.circuit.ac import MAX_STAGE_UNKNOWNS
from service.circuit.blocks import decompose
from service.circuit.mna import build_mna
from tests.circuit.builders import MACRO, catalogue, lc_ladder_butterworth3, rc_ladder, series_rlc

F = np.logspace(1, 5, 301)


def db(h):
    return 20 * np.log10(np.abs(h))


def _crossing(f, mag_db, level):
    """Frequency where a falling magnitude crosses ``level`` (log-linear interpolation)."""
    i = int(np.flatnonzero(mag_db < level)[0])
    lf = np.interp(level, [mag_db[i], mag_db[i - 1]], [np.log10(f[i]), np.log10(f[i - 1])])
    return 10 ** lf


def test_rc_lowpass_corner_and_slope():
    # common practice (no source): 1.6 kohm / 10 nF has fc = 1/(2 pi R C) = 9.947 kHz, and above it
    # the magnitude falls 20 dB per decade.
    ckt = rc_ladder(1, r=1.6e3, c=10e-9)
    f = np.logspace(3, 6, 3001)
    h = ac_response(ckt, f)[0]
    fc = _crossing(f, db(h), -10 * math.log10(2))
    assert fc == pytest.approx(9947.18, rel=1e-4)
    assert abs(fc - 9.95e3) < 10.0
    h2 = ac_response(ckt, np.array([1e6, 1e7]))[0]   # a decade well above fc
    assert db(h2[0]) - db(h2[1]) == pytest.approx(20.0, abs=1e-3)


def test_two_loaded_rc_sections_exact():
    # Two equal RC sections in cascade, the second loading the first. Nodal analysis
    # (source: J. W. Nilsson, S. A. Riedel, Electric Circuits, 10th ed., Pearson, 2015, ch. 4 node-voltage
    # method, applied to the ladder; from memory) gives
    #   H(s) = 1 / (1 + 3 sRC + (sRC)^2),
    # not the square 1/(1 + sRC)^2 that two isolated sections would give.
    r, c = 1.6e3, 10e-9
    ckt = rc_ladder(2, r=r, c=c)
    s = 2j * np.pi * F
    x = s * r * c
    exact = 1.0 / (1.0 + 3.0 * x + x * x)
    h = ac_response(ckt, F)[0]
    np.testing.assert_allclose(h, exact, rtol=1e-12)
    # the -3 dB point: |H|^2 = 1/2  <=>  w^4 R^4 C^4 + 7 w^2 R^2 C^2 - 1 = 0
    wrc = math.sqrt((-7 + math.sqrt(53)) / 2)
    f3_exact = wrc / (2 * math.pi * r * c)
    f3_unloaded = math.sqrt(math.sqrt(2) - 1) / (2 * math.pi * r * c)   # (1 + x^2) = sqrt(2)
    f = np.logspace(3, 5, 20001)
    f3 = _crossing(f, db(ac_response(ckt, f)[0]), -10 * math.log10(2))
    assert f3 == pytest.approx(f3_exact, rel=1e-4)
    assert f3 < 0.6 * f3_unloaded   # the loading effect is large, not a rounding matter


def test_series_rlc_closed_form():
    # source: scipy.signal (reference library) -- freqs of 1/(LC s^2 + RC s + 1)
    from scipy.signal import freqs

    r, l, c = 100.0, 10e-3, 100e-9
    _, ref = freqs([1.0], [l * c, r * c, 1.0], worN=2 * np.pi * F)
    np.testing.assert_allclose(ac_response(series_rlc(r, l, c), F)[0], ref, rtol=1e-10)


def test_doubly_terminated_butterworth_ladder():
    # source: G. L. Matthaei, L. Young, E. M. T. Jones, Microwave Filters, Impedance-Matching Networks and
    # Coupling Structures, McGraw-Hill, 1964, eq. 4.05-2 (g_k = 2 sin((2k-1) pi / 2n); n = 3: 1, 2, 1)
    # (from memory). The doubly terminated ladder has |H|^2 = (1/4) / (1 + (f/fc)^6).
    fc = 10e3
    h = ac_response(lc_ladder_butterworth3(r=1e3, fc=fc), F)[0]
    np.testing.assert_allclose(np.abs(h) ** 2, 0.25 / (1 + (F / fc) ** 6), rtol=1e-10)


def test_opamp_macromodel_follower():
    # A unity follower of A(s) = a0/(1 + s a0/wt) gives A/(1 + A) exactly.
    c = Circuit()
    c.add_voltage_source("VIN", "in", "0")
    c.add_opamp("U1", "in", "out", "out", model=OpAmpModel(gbw_hz=1e6, a0=1e4))
    s = 2j * np.pi * F
    a = 1e4 / (1 + s * 1e4 / (2 * np.pi * 1e6))
    np.testing.assert_allclose(ac_response(c, F)[0], a / (1 + a), rtol=1e-12)


def test_vccs_sign_convention():
    # SPICE convention: gm*(V(cp)-V(cn)) flows from p through the source to n, so a load R on p sees -gm*R.
    c = Circuit()
    c.add_voltage_source("VIN", "in", "0")
    c.add_vccs("G1", "out", "0", "in", "0", 2e-3)
    c.add_resistor("R1", "out", "0", 1e3)
    np.testing.assert_allclose(ac_response(c, F[:5])[0], -2.0, rtol=1e-14)


def test_ideal_inverting_amplifier():
    c = Circuit()
    c.add_voltage_source("VIN", "in", "0")
    c.add_resistor("R1", "in", "m", 1e3)
    c.add_resistor("R2", "m", "out", 4.7e3)
    c.add_opamp("U1", "0", "m", "out")
    np.testing.assert_allclose(ac_response(c, F[:5], method="staged")[0], -4.7, rtol=1e-13)


CASES = [(n, m) for m in (None, MACRO) for n in catalogue(m)]


@pytest.mark.parametrize(("name", "model"), CASES,
                         ids=[f"{n}-{'ideal' if m is None else 'macro'}" for n, m in CASES])
def test_staged_equals_full_solve(name, model):
    ckt = catalogue(model)[name](trials=50, seed=11)
    hs = ac_response(ckt, F, method="staged")
    hf = ac_response(ckt, F, method="full")
    assert hs.shape == hf.shape == (50, F.size)
    assert np.max(np.abs(db(hs / hf))) < 1e-6
    assert np.max(np.abs(np.angle(hs / hf, deg=True))) < 1e-6


def test_cascade_is_split_into_stages():
    ckt = catalogue(None)["butterworth8"]()
    system = build_mna(ckt)
    blocks = decompose(system, system.node_index["out"])
    sizes = sorted(len(b.cols) for b in blocks)
    # the input row plus four three-node Sallen-Key stages; op-amp output currents are not needed
    assert sizes == [1, 3, 3, 3, 3]
    # loading passive sections stay together
    ladder = rc_ladder(4)
    system = build_mna(ladder)
    assert max(len(b.cols) for b in decompose(system, system.node_index["out"])) == 4


def test_staged_product_of_stage_responses():
    # cascade of isolated stages: the response is the product of the stages' responses
    from tests.circuit.builders import sallen_key_lowpass

    one = ac_response(sallen_key_lowpass(None, f0=1e3, q=0.9), F)[0]
    two = ac_response(sallen_key_lowpass(None, f0=3e3, q=2.0), F)[0]
    c = Circuit()
    c.add_voltage_source("VIN", "in", "0")
    for k, (f0, q, a, b, o, prev) in enumerate([(1e3, 0.9, "a1", "b1", "o1", "in"), (3e3, 2.0, "a2", "b2", "out", "o1")]):
        w, r = 2 * math.pi * f0, 10e3
        c.add_resistor(f"R{2 * k + 1}", prev, a, r)
        c.add_resistor(f"R{2 * k + 2}", a, b, r)
        c.add_capacitor(f"C{2 * k + 1}", a, o, 2 * q / (w * r))
        c.add_capacitor(f"C{2 * k + 2}", b, "0", 1 / (2 * q * w * r))
        c.add_opamp(f"U{k + 1}", b, o, o)
    np.testing.assert_allclose(ac_response(c, F)[0], one * two, rtol=1e-10)


def test_auto_uses_full_solve_for_a_long_passive_ladder():
    ckt = rc_ladder(MAX_STAGE_UNKNOWNS + 2, trials=3)
    np.testing.assert_allclose(ac_response(ckt, F), ac_response(ckt, F, method="full"), rtol=1e-12)


@pytest.mark.parametrize("method", ["full", "staged"])
def test_chunking_gives_the_same_answer(method):
    ckt = catalogue(MACRO)["state_variable_bp"](trials=300, seed=2)
    big = ac_response(ckt, F, method=method)
    small = ac_response(ckt, F, method=method, memory_limit_bytes=2**20)
    np.testing.assert_allclose(small, big, rtol=1e-13)


def test_unaffected_loads_do_not_change_the_output():
    ckt = catalogue(None)["sallen_key"]()
    loaded = ckt.with_values({})
    loaded.add_resistor("RL", "out", "0", 100.0)
    loaded.add_capacitor("CL", "out", "0", 1e-6)
    np.testing.assert_allclose(ac_response(loaded, F), ac_response(ckt, F), rtol=1e-13)


def test_zero_frequency_and_scalar_broadcast():
    ckt = rc_ladder(2, trials=4)
    h = ac_response(ckt, np.array([0.0, 10.0]))
    assert h.shape == (4, 2)
    np.testing.assert_allclose(h[:, 0], 1.0, rtol=1e-12)


@pytest.mark.parametrize("freq", [np.array([]), np.array([[1.0]]), np.array([-1.0]), np.array([np.nan])])
def test_bad_frequencies_rejected(freq):
    with pytest.raises(CircuitError, match="frequency_hz"):
        ac_response(rc_ladder(1), freq)


def test_bad_options_rejected():
    with pytest.raises(CircuitError, match="method"):
        ac_response(rc_ladder(1), F, method="fast")
    with pytest.raises(CircuitError, match="memory_limit_bytes"):
        ac_response(rc_ladder(1), F, memory_limit_bytes=10)


def test_output_at_the_input_node():
    np.testing.assert_allclose(ac_response(rc_ladder(1), F[:3], output="in"), 1.0)


def _summing_circuit(trials):
    """Two RC-follower branches from the input summed by an inverting amplifier: the output stage has two inputs."""
    rng = np.random.default_rng(5)

    def v(x):
        return x * (1 + 0.02 * rng.standard_normal(trials))

    c = Circuit("summing")
    c.add_voltage_source("VIN", "in", "0")
    c.add_resistor("R1", "in", "a", v(10e3))
    c.add_capacitor("C1", "a", "0", v(10e-9))
    c.add_opamp("U1", "a", "o1", "o1")
    c.add_resistor("R2", "in", "b", v(1e3))
    c.add_capacitor("C2", "b", "0", v(10e-9))
    c.add_opamp("U2", "b", "o2", "o2", model=MACRO)
    c.add_resistor("R3", "o1", "m", v(10e3))
    c.add_resistor("R4", "o2", "m", v(20e3))
    c.add_resistor("R5", "m", "out", v(10e3))
    c.add_capacitor("C3", "m", "out", v(1e-9))
    c.add_opamp("U3", "0", "m", "out")
    return c


def test_stage_with_two_inputs_staged_equals_full():
    ckt = _summing_circuit(40)
    hs, hf = ac_response(ckt, F, method="staged"), ac_response(ckt, F, method="full")
    assert np.max(np.abs(db(hs / hf))) < 1e-6 and np.max(np.abs(np.angle(hs / hf, deg=True))) < 1e-6


def test_long_cascade_beyond_the_merge_degree_staged_equals_full():
    from service.circuit.staged import MAX_MERGE_DEGREE

    rng = np.random.default_rng(9)
    stages = MAX_MERGE_DEGREE // 3 + 2          # three poles per macromodel Sallen-Key stage
    c = Circuit("long cascade")
    c.add_voltage_source("VIN", "in", "0")
    prev = "in"
    for k in range(stages):
        w, r, q = 2 * math.pi * 1e3 * (1 + 0.1 * k), 10e3, 0.6 + 0.05 * k
        a, b, o = f"a{k}", f"b{k}", ("out" if k == stages - 1 else f"o{k}")
        c.add_resistor(f"R{2 * k + 1}", prev, a, r * (1 + 0.01 * rng.standard_normal(8)))
        c.add_resistor(f"R{2 * k + 2}", a, b, r)
        c.add_capacitor(f"C{2 * k + 1}", a, o, 2 * q / (w * r))
        c.add_capacitor(f"C{2 * k + 2}", b, "0", 1 / (2 * q * w * r))
        c.add_opamp(f"U{k + 1}", b, o, o, model=MACRO)
        prev = o
    f = np.logspace(1, 4, 101)   # the stopband reaches about -400 dB: compare there relative to each value
    hs, hf = ac_response(c, f, method="staged"), ac_response(c, f, method="full")
    assert np.max(np.abs(db(hs / hf))) < 1e-6 and np.max(np.abs(np.angle(hs / hf, deg=True))) < 1e-5
