"""Built stage circuits against the sections they realize: circuit engine and ngspice."""

from __future__ import annotations

import numpy as np
import pytest

from service.approximation import Section, section_polynomials
from service.circuit import Circuit, ac_response, to_spice
from tests.ngspice import run_ngspice_ac
from tests.realization.test_topologies_grid import CASES, NOTCH_KINDS, expected_gain, free_candidates


def refs_for(top, sec, strategy) -> dict[str, str]:
    """Design-wide refs deliberately numbered apart from the roles."""
    refs, counts = {}, {"resistor": 10, "capacitor": 20}
    for p in top.parts(sec, strategy):
        counts[p.kind] += 1
        refs[p.role] = ("R" if p.kind == "resistor" else "C") + str(counts[p.kind])
    for i, u in enumerate(top.opamp_roles(sec, strategy)):
        refs[u] = f"U{31 + i}"
    return refs


def stage_circuit(top, sec, strategy, values) -> Circuit:
    c = Circuit(title=f"{top.name} {sec.kind.value}")
    c.add_voltage_source("VIN", "in", "0")
    top.build(c, sec, strategy, values, refs_for(top, sec, strategy), input_node="in", output_node="out", prefix="s1",
              opamp_model=None)
    return c


def standard_response(sec: Section, gain: float, f_hz: np.ndarray) -> np.ndarray:
    s = Section(sec.kind, sec.order, sec.f0_hz, sec.q, sec.fz_hz, gain)
    b, a = section_polynomials(s)
    jw = 2j * np.pi * f_hz
    return np.polyval(b, jw) / np.polyval(a, jw)


def grid(sec: Section) -> np.ndarray:
    f = np.geomspace(sec.f0_hz / 100.0, sec.f0_hz * 100.0, 241)
    if sec.kind in NOTCH_KINDS:
        f = f[np.abs(np.log(f / sec.fz_hz)) > 1e-3]      # not on the zero itself
    return f


@pytest.mark.parametrize("top, sec, strategy", CASES)
def test_circuit_equals_standard_form(top, sec, strategy):
    # source: the section's standard form (service/approximation/types.py), ideal op-amps in the circuit engine
    values = top.design(sec, strategy, free_candidates(top, sec, strategy))
    circuit = stage_circuit(top, sec, strategy, values)
    names = {el.name for el in circuit.elements}
    assert set(refs_for(top, sec, strategy).values()) <= names
    f = grid(sec)
    h = ac_response(circuit, f, output="out")
    ref = standard_response(sec, expected_gain(top, sec, strategy), f)
    assert h.shape == (4, f.size)
    peak = np.max(np.abs(ref))
    err = np.abs(h - ref[None, :])
    assert np.all(err <= 1e-6 * np.abs(ref)[None, :] + 1e-9 * peak), float(np.max(err / (np.abs(ref) + 1e-3 * peak)))


@pytest.mark.parametrize("top, sec, strategy", CASES)
def test_polynomials_match_the_circuit_for_off_design_values(top, sec, strategy):
    # Snapped values leave the design point: the closed form must still be the circuit's transfer function.
    values = top.design(sec, strategy, free_candidates(top, sec, strategy))
    rng = np.random.default_rng(7)
    values = {k: v * rng.uniform(0.9, 1.1, v.shape) for k, v in values.items()}
    circuit = stage_circuit(top, sec, strategy, values)
    f = grid(sec)
    h = ac_response(circuit, f, output="out")
    num, den = top.polynomials(sec, strategy, values)
    jw = 2j * np.pi * f
    mine = sum(np.asarray(c)[:, None] * jw[None, :] ** (len(num) - 1 - i) for i, c in enumerate(num)) / \
        sum(np.asarray(c)[:, None] * jw[None, :] ** (len(den) - 1 - i) for i, c in enumerate(den))
    peak = np.max(np.abs(mine), axis=1, keepdims=True)
    np.testing.assert_array_less(np.abs(h - mine), 1e-7 * np.abs(mine) + 1e-10 * peak)


NGSPICE_CASES = [c for c in CASES if c.values[1].f0_hz == 1234.5 and c.values[1].gain in (1.0, 1.7)
                 or (c.values[1].f0_hz == 1234.5 and c.values[2] == "equal_component")]


@pytest.mark.parametrize("top, sec, strategy", NGSPICE_CASES)
def test_exported_netlist_in_ngspice_matches_the_section(top, sec, strategy):
    # source: ngspice AC analysis (reference simulator); exact (unsnapped) values
    values = top.design(sec, strategy, free_candidates(top, sec, strategy, n=1))
    circuit = stage_circuit(top, sec, strategy, {k: float(v[0]) for k, v in values.items()})
    netlist = to_spice(circuit, output="out", ac=("dec", 40, sec.f0_hz / 100.0, sec.f0_hz * 100.0))
    f, v = run_ngspice_ac(netlist, nodes=("out",))
    ref = standard_response(sec, expected_gain(top, sec, strategy), f)
    h = v["out"]
    peak = np.max(np.abs(ref))
    visible = np.abs(ref) > 1e-3 * peak            # above -60 dB of the peak: compare in dB
    db = 20 * np.log10(np.abs(h[visible]) / np.abs(ref[visible]))
    assert np.max(np.abs(db)) < 0.01
    assert np.all(np.abs(h[~visible] - ref[~visible]) < 1e-5 * peak)     # in the notch: absolute
