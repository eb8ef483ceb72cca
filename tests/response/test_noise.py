"""Noise report: kT/C, the integration rule, contributions, SNR, bad input."""

from __future__ import annotations

import math

import numpy as np
import pytest

from service.approximation import Section, SectionKind
from service.circuit import Circuit, OpAmpSources, to_spice
from service.circuit.noise import BOLTZMANN_J_PER_K
from service.realization import design_filter
from service.realization.supply import filter_circuit
from service.response.errors import InvalidLevel
from service.response.noise import analyze_noise, integrate_power_law, integration_grid
from tests.ngspice import run_ngspice_noise
from tests.realization.spice_checks import one_section

T_K = 300.15
KT = BOLTZMANN_J_PER_K * T_K


def _rc_first_order(r_ohm: float, c_farad: float):
    """An rc_first_order lowpass stage (ideal, noiseless buffer) with R1 = r_ohm, C1 = c_farad."""
    f0 = 1 / (2 * math.pi * r_ohm * c_farad)
    sec = Section(SectionKind.LOWPASS, 1, f0, None, None, 1.0)
    d = design_filter(one_section(sec), topology="rc_first_order")
    comp = {c.role: c for c in d.plans[0].components}
    fc = filter_circuit(d)
    ckt = fc.circuit.with_values({comp["R1"].ref: r_ohm, comp["C1"].ref: c_farad})
    return ckt, f0, fc.stage_of


@pytest.mark.parametrize("r_ohm", [1e3, 100e3, 1e6])
def test_kt_over_c_is_independent_of_r(r_ohm):
    # source: J. B. Johnson, "Thermal agitation of electricity in conductors", Phys. Rev. 32, 97 (1928) and
    # H. Nyquist, Phys. Rev. 32, 110 (1928): 4kTR; integrated through the RC lowpass, int_0^inf 4kTR/(1 + (2 pi f RC)^2)
    # df = kT/C (B. Razavi, Design of Analog CMOS Integrated Circuits, 2001, sec. 7.2, example of kT/C, from memory)
    c_farad = 1e-9
    ckt, f0, stage_of = _rc_first_order(r_ohm, c_farad)
    band = (f0 * 1e-4, f0 * 1e4)
    rep = analyze_noise(ckt, [f0], band, temperature_k=T_K, stage_of=stage_of)
    # the band leaves out 2/pi * 1e-4 of the power at each end (the tails of the Lorentzian)
    tails = 1 - 2 * (2 / math.pi) * 1e-4
    assert rep.output_rms_v == pytest.approx(math.sqrt(KT / c_farad * tails), rel=1e-5)
    assert rep.output_rms_v == pytest.approx(math.sqrt(KT / c_farad), rel=2e-4)
    # density at the corner: half of 4kTR
    assert rep.output_density_v_rthz[0] == pytest.approx(math.sqrt(4 * KT * r_ohm / 2), rel=1e-9)
    assert [(p.kind, p.stage) for p in rep.parts] == [("resistor", 1)]
    assert rep.parts[0].share == pytest.approx(1.0)
    assert rep.stages[0].stage == 1


def test_band_limited_rc_matches_the_closed_form():
    # source: Nyquist (1928) with the integral of the Lorentzian: 4kTR fc (atan(f2/fc) - atan(f1/fc))
    r, cap = 10e3, 10e-9
    c = Circuit()
    c.add_voltage_source("VIN", "in", "0")
    c.add_resistor("R1", "in", "out", r)
    c.add_capacitor("C1", "out", "0", cap)
    fc = 1 / (2 * math.pi * r * cap)
    f1, f2 = 100.0, 5e3
    rep = analyze_noise(c, [1e3], (f1, f2), temperature_k=T_K)
    exact = 4 * KT * r * fc * (math.atan(f2 / fc) - math.atan(f1 / fc))
    assert rep.output_rms_v ** 2 == pytest.approx(exact, rel=1e-6)


def test_power_law_rule_is_exact_on_power_laws():
    # common practice (no source): the integral of c f^a from f1 to f2
    f = np.geomspace(10.0, 1e4, 7)
    for a in (-2.0, -1.0, 0.0, 1.5):
        got = float(integrate_power_law(f, 3.0 * f ** a))
        exact = 3.0 * (math.log(1e4 / 10) if a == -1 else (1e4 ** (a + 1) - 10 ** (a + 1)) / (a + 1))
        assert got == pytest.approx(exact, rel=1e-12)
    # zeros fall back to the trapezoid rule
    assert float(integrate_power_law(np.array([1.0, 3.0]), np.array([0.0, 2.0]))) == pytest.approx(2.0)
    g = integration_grid((10.0, 1e5), 200)
    assert g[0] == 10.0 and g[-1] == 1e5 and g.size == 801


def _noisy_design():
    op = {"gbw_hz": 2e6, "en_nv_rthz": 12.0, "in_pa_rthz": 0.8, "en_corner_hz": 20.0}
    secs = [Section(SectionKind.LOWPASS, 2, 1000.0, 1.3, None, 1.0),
            Section(SectionKind.LOWPASS, 2, 1000.0, 0.54, None, 1.0)]
    from tests.realization.spice_checks import sections_record
    return design_filter(sections_record(secs), opamp=op, section_order="as_computed")


def test_integrated_noise_matches_ngspice_total():
    d = _noisy_design()
    fc = filter_circuit(d)
    net = to_spice(fc.circuit, ac=None, noise=("dec", 200, 10.0, 100e3))
    # source: ngspice noise analysis (reference simulator): onoise_total over its sweep
    ref = run_ngspice_noise(net)
    rep = analyze_noise(fc.circuit, ref["frequency_hz"], (10.0, 100e3), stage_of=fc.stage_of)
    assert abs(20 * math.log10(rep.output_rms_v / ref["onoise_total"])) < 0.1
    assert abs(20 * math.log10(rep.output_rms_v / ref["onoise_total"])) < 1e-3   # both integrate power laws
    np.testing.assert_allclose(rep.output_density_v_rthz, ref["onoise"], rtol=1e-4)


def test_contributions_add_up_and_rank():
    d = _noisy_design()
    fc = filter_circuit(d)
    rep = analyze_noise(fc.circuit, np.geomspace(10, 1e5, 50), (10.0, 100e3), stage_of=fc.stage_of,
                        full_scale_v=2.5, max_output_v=1.2)
    for group in (rep.parts, rep.sources, rep.stages):
        assert sum(c.rms_v ** 2 for c in group) == pytest.approx(rep.output_rms_v ** 2, rel=1e-12)
        assert sum(c.share for c in group) == pytest.approx(1.0, rel=1e-12)
        assert [c.rms_v for c in group] == sorted((c.rms_v for c in group), reverse=True)
    assert {c.stage for c in rep.stages} == {1, 2}
    resistors = {c.ref for s in d.stages for c in s.components if c.kind == "resistor"}
    assert {p.name for p in rep.parts} == resistors | {"U1", "U2"}
    assert rep.snr_db == pytest.approx(20 * math.log10(2.5 / math.sqrt(2) / rep.output_rms_v))
    assert rep.dynamic_range_db == pytest.approx(20 * math.log10(1.2 / math.sqrt(2) / rep.output_rms_v))
    assert rep.input_rms_v == pytest.approx(rep.output_rms_v / rep.reference_gain)
    assert rep.reference_gain == pytest.approx(1.0, rel=1e-2)
    body = rep.as_dict()
    assert body["output_rms_v"] == rep.output_rms_v and len(body["output_density_v_rthz"]) == 50
    assert not rep.notes


def test_note_when_no_opamp_noise():
    d = _noisy_design()
    fc = filter_circuit(d, opamp={"en_nv_rthz": 0.0, "in_pa_rthz": 0.0})
    plain = fc.circuit.with_opamp_sources({u: OpAmpSources() for u in ("U1", "U2")})
    rep = analyze_noise(plain, [100.0], (10.0, 1e4))
    assert rep.notes and "thermal" in rep.notes[0]


@pytest.mark.parametrize(("kwargs", "field"), [
    ({"band_hz": (100.0, 10.0)}, "noise.band_hz"), ({"band_hz": (0.0, 10.0)}, "noise.band_hz"),
    ({"band_hz": (10.0, 10.0)}, "noise.band_hz"), ({"band_hz": "wide"}, "noise.band_hz"),
    ({"temperature_k": -5.0}, "noise.temperature_k"), ({"temperature_k": 1e6}, "noise.temperature_k"),
    ({"full_scale_v": 0.0}, "noise.full_scale_v"), ({"max_output_v": float("inf")}, "noise.max_output_v"),
    ({"frequency_hz": [0.0, 1.0]}, "noise.frequency_hz"), ({"points_per_decade": 3}, "noise.points_per_decade"),
])
def test_bad_input_names_the_field(kwargs, field):
    d = _noisy_design()
    ckt = filter_circuit(d).circuit
    args = {"frequency_hz": [100.0], "band_hz": (10.0, 1e4)}
    args.update(kwargs)
    with pytest.raises(InvalidLevel) as err:
        analyze_noise(ckt, args.pop("frequency_hz"), args.pop("band_hz"), **args)
    assert err.value.field == field
