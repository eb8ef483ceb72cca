"""Noise analysis of the circuit engine: closed forms, the two solvers, ngspice ``.noise``.

These tests fail (never skip) when ngspice is missing.
"""

from __future__ import annotations

import numpy as np
import pytest

from service.circuit import (Circuit, CircuitError, NoiseKind, OpAmpModel, OpAmpSources, ac_response, noise_spectra,
                             to_spice)
from service.circuit.noise import BOLTZMANN_J_PER_K, DEFAULT_TEMPERATURE_K
from tests.circuit.builders import MACRO, catalogue, sallen_key_lowpass
from tests.ngspice import run_ngspice_noise

KT = BOLTZMANN_J_PER_K * DEFAULT_TEMPERATURE_K
NOISY = OpAmpSources(en_v_rthz=8e-9, in_a_rthz=1.5e-12, en_corner_hz=200.0, in_corner_hz=50.0)
DB_TOL = 0.1          # the brief's tolerance against the reference simulator
F = np.logspace(1, 5, 41)


def _with_noise(ckt: Circuit) -> Circuit:
    ops = [el.name for el in ckt.elements if el.kind.value == "opamp"]
    return ckt.with_opamp_sources({u: NOISY for u in ops})


def test_resistive_divider_is_the_parallel_resistance():
    # source: H. Nyquist, "Thermal agitation of electric charge in conductors", Phys. Rev. 32, 110 (1928):
    # the open-circuit noise of a two-terminal resistive network is 4kT Re(Z); here Z = R1 || R2.
    c = Circuit()
    c.add_voltage_source("VIN", "in", "0")
    c.add_resistor("R1", "in", "out", 3e3)
    c.add_resistor("R2", "out", "0", 6e3)
    res = noise_spectra(c, F)
    assert res.density.shape == (1, 2, F.size)
    np.testing.assert_allclose(res.total[0], 4 * KT * 2e3, rtol=1e-12)
    # each resistor's share: 4kT/R_i * (R1||R2)^2
    np.testing.assert_allclose(res.density[0, 0], 4 * KT / 3e3 * 2e3 ** 2, rtol=1e-12)
    np.testing.assert_allclose(res.gain[0], 2 / 3, rtol=1e-12)


def test_rc_density_is_a_lowpass_of_4ktr():
    # source: Nyquist (1928): 4kTR filtered by the RC divider, |1/(1 + j w R C)|^2
    r, cap = 10e3, 10e-9
    c = Circuit()
    c.add_voltage_source("VIN", "in", "0")
    c.add_resistor("R1", "in", "out", r)
    c.add_capacitor("C1", "out", "0", cap)
    res = noise_spectra(c, F)
    w = 2 * np.pi * F
    np.testing.assert_allclose(res.total[0], 4 * KT * r / (1 + (w * r * cap) ** 2), rtol=1e-12)


def test_opamp_voltage_noise_and_corner_in_a_noninverting_amplifier():
    # common practice (no source): en appears at the output times the noise gain 1 + Rf/Rg; with a 1/f corner fc
    # the density is en^2 (1 + fc/f), 3 dB up at f = fc
    c = Circuit()
    c.add_voltage_source("VIN", "in", "0")
    c.add_resistor("RG", "m", "0", 1e3)
    c.add_resistor("RF", "out", "m", 9e3)
    c.add_opamp("U1", "in", "m", "out", sources=OpAmpSources(en_v_rthz=5e-9, en_corner_hz=100.0))
    res = noise_spectra(c, np.array([100.0, 1e4]))
    en = [s for s in res.sources if s.kind is NoiseKind.OPAMP_VOLTAGE]
    assert [s.name for s in en] == ["U1.en"]
    k = res.sources.index(en[0])
    np.testing.assert_allclose(res.density[0, k], (10 * 5e-9) ** 2 * np.array([2.0, 1.01]), rtol=1e-12)
    # RG's noise current flows into the virtual ground node and out through RF: 4kT/RG * RF^2 at the output
    rg, rf = 1e3, 9e3
    r_src = res.density[0, [res.sources.index(s) for s in res.sources if s.element == "RG"][0]]
    np.testing.assert_allclose(r_src, 4 * KT / rg * rf ** 2, rtol=1e-12)


def test_current_noise_sees_the_source_resistance():
    # common practice (no source): a follower with R at its + input: in * R at the output; the - input is driven
    # by the output (zero impedance) and adds nothing
    c = Circuit()
    c.add_voltage_source("VIN", "in", "0")
    c.add_resistor("R1", "in", "p", 100e3)
    c.add_opamp("U1", "p", "out", "out", sources=OpAmpSources(in_a_rthz=2e-12))
    res = noise_spectra(c, F)
    names = [s.name for s in res.sources]
    assert names == ["R1", "U1.in+", "U1.in-"]
    np.testing.assert_allclose(res.density[0, 1], (2e-12 * 100e3) ** 2, rtol=1e-12)
    np.testing.assert_allclose(res.density[0, 2], 0.0, atol=1e-40)


@pytest.mark.parametrize("model", [None, MACRO], ids=["ideal", "macro"])
@pytest.mark.parametrize("name", sorted(catalogue(None)))
def test_full_and_blocked_solvers_agree(name, model):
    ckt = _with_noise(catalogue(model)[name](trials=3, seed=2))
    a = noise_spectra(ckt, F, method="full")
    b = noise_spectra(ckt, F, method="blocked")
    assert a.density.shape == b.density.shape == (3, len(a.sources), F.size)
    np.testing.assert_allclose(b.density, a.density, rtol=1e-9, atol=1e-12 * a.density.max())
    np.testing.assert_allclose(b.gain, a.gain, rtol=1e-9, atol=1e-12)
    # the signal transfer of the adjoint solve is the AC response (whose staged polynomial interpolation
    # differs from a direct solve by a few 1e-9 relative near a macromodel's high-frequency zeros)
    np.testing.assert_allclose(a.gain, ac_response(ckt, F), rtol=1e-7, atol=1e-12)


def test_trials_are_independent():
    ckt = _with_noise(catalogue(MACRO)["state_variable_bp"](trials=5, seed=4))
    whole = noise_spectra(ckt, F).density
    for t in (0, 3):
        one = noise_spectra(ckt.trial(t), F).density[0]
        np.testing.assert_allclose(whole[t], one, rtol=1e-12, atol=1e-40)


@pytest.mark.parametrize("model", [None, MACRO, OpAmpModel(gbw_hz=1e6, a0=2e5, rout_ohm=75.0)],
                         ids=["ideal", "macro", "macro-rout"])
@pytest.mark.parametrize("name", sorted(catalogue(None)))
def test_density_matches_ngspice(name, model):
    ckt = _with_noise(catalogue(model)[name]())
    net = to_spice(ckt, ac=None, noise=("dec", 10, 10.0, 100e3))
    # source: ngspice noise analysis (reference simulator)
    ref = run_ngspice_noise(net)
    res = noise_spectra(ckt, ref["frequency_hz"])
    db = 10 * np.log10(res.total[0]) - 20 * np.log10(ref["onoise"])
    assert np.max(np.abs(db)) < DB_TOL, f"{name}: {np.max(np.abs(db)):.3g} dB from ngspice"
    # input-referred: output density over |H|, where |H| is above -80 dB (deeper, the exported ideal op-amp,
    # a VCVS of gain 1e9, leaves a floor in the simulator's stopband that the nullor does not have)
    keep = np.abs(res.gain[0]) > 1e-4
    db_in = 10 * np.log10(res.total[0]) - 20 * np.log10(np.abs(res.gain[0])) - 20 * np.log10(ref["inoise"])
    assert np.max(np.abs(db_in[keep])) < DB_TOL


def test_temperature_scales_the_resistors_only():
    ckt = sallen_key_lowpass(None).with_opamp_sources({"U1": OpAmpSources(en_v_rthz=1e-8)})
    a = noise_spectra(ckt, F, temperature_k=300.0)
    b = noise_spectra(ckt, F, temperature_k=600.0)
    for j, s in enumerate(a.sources):
        ratio = b.density[0, j] / a.density[0, j]
        expected = 2.0 if s.kind is NoiseKind.RESISTOR_THERMAL else 1.0
        np.testing.assert_allclose(ratio, expected, rtol=1e-12)


def test_netlist_noise_directive_and_generators():
    ckt = sallen_key_lowpass(MACRO).with_opamp_sources({"U1": NOISY})
    net = to_spice(ckt, ac=None, noise=("dec", 10, 10.0, 100e3), temperature_k=310.15)
    lines = net.splitlines()
    assert "* noise analysis: output v(out), input source VIN" in lines
    assert ".noise v(out) VIN dec 10 10 100k" in lines
    assert ".temp 37" in lines
    assert ".ac" not in net
    assert any(line.startswith("EEN inp_n inp en1 en2 1") for line in lines)
    assert "R1 p 0 1 noisy=0" in lines
    # the generator resistor gives en^2 = 4kTR at the netlist's temperature
    r = float([line for line in lines if line.startswith("REN ")][0].split()[3].rstrip("k")) * 1e3
    assert 4 * BOLTZMANN_J_PER_K * 310.15 * r == pytest.approx(NOISY.en_v_rthz ** 2, rel=1e-12)


@pytest.mark.parametrize(("kwargs", "field"), [
    ({"en_v_rthz": -1e-9}, "en_v_rthz"), ({"in_a_rthz": float("nan")}, "in_a_rthz"),
    ({"en_corner_hz": -5.0}, "en_corner_hz"), ({"vos_v": float("inf")}, "vos_v"), ({"ib_a": "1n"}, "ib_a"),
])
def test_bad_sources_raise_with_field(kwargs, field):
    with pytest.raises(CircuitError) as err:
        OpAmpSources(**kwargs)
    assert err.value.field == field


@pytest.mark.parametrize(("kwargs", "field"), [
    ({"frequency_hz": [0.0, 10.0]}, "frequency_hz"), ({"temperature_k": 0.0}, "temperature_k"),
    ({"temperature_k": float("nan")}, "temperature_k"), ({"method": "staged"}, "method"),
])
def test_bad_requests_raise_with_field(kwargs, field):
    args = {"frequency_hz": F}
    args.update(kwargs)
    freq = args.pop("frequency_hz")
    with pytest.raises(CircuitError) as err:
        noise_spectra(sallen_key_lowpass(None), freq, **args)
    assert err.value.field == field


def test_sources_survive_value_changes_and_trials():
    ckt = sallen_key_lowpass(MACRO, trials=4).with_opamp_sources({"U1": NOISY})
    assert ckt.with_values({"R1": 5e3}).element("U1").sources == NOISY
    assert ckt.trial(2).element("U1").sources == NOISY
    with pytest.raises(CircuitError):
        ckt.with_opamp_sources({"R1": NOISY})
    cleared = ckt.with_opamp_sources({"U1": None})
    assert cleared.element("U1").sources is None
    assert [s.name for s in noise_spectra(cleared.trial(0), F).sources] == ["R1", "R2"]
