"""The exported netlists, run in ngspice, against the ideal sections and the requirements."""

from __future__ import annotations

import numpy as np
import pytest

from service.approximation import design_by_order, design_by_requirement
from service.realization import TOPOLOGIES, design_filter
from tests.realization.spice_checks import (
    achieved_response, ngspice_at, ngspice_sweep, one_section, section_response, topology_cases,
)
from tests.ngspice import run_ngspice_ac


CASES = list(topology_cases())


def _band(section):
    f = np.logspace(np.log10(section.f0_hz / 10), np.log10(section.f0_hz * 10), 201)
    return f


def _db_dev(a, b):
    return np.abs(20 * np.log10(np.abs(a) / np.abs(b)))


def test_every_topology_and_kind_is_covered():
    kinds = {(n, c.values[2].kind) for c in CASES for n in [c.values[0]]}
    for name, topo in TOPOLOGIES.items():
        for k in topo.kinds:
            assert (name, k) in kinds, f"{name} {k.value} has no case"


@pytest.mark.parametrize("name,strategy,section", CASES)
def test_exact_values_match_ideal_section_in_ngspice(name, strategy, section):
    d = design_filter(one_section(section), topology=name, strategy=strategy, exact=True)
    st = d.stages[0]
    f = _band(section)
    fs, h = ngspice_sweep(d.netlist, f[0], f[-1], 50)
    ideal = section_response(st.section, fs)
    keep = np.abs(ideal) > 10 ** (-30 / 20) * np.max(np.abs(ideal))  # away from the notch floor
    # source: ngspice AC analysis (reference simulator); exact values realize the section itself
    assert np.max(_db_dev(h[keep], ideal[keep])) < 0.01


@pytest.mark.parametrize("name,strategy,section", CASES)
def test_snapped_values_match_within_their_error(name, strategy, section):
    d = design_filter(one_section(section), topology=name, strategy=strategy)
    st = d.stages[0]
    fs, h = ngspice_sweep(d.netlist, section.f0_hz / 10, section.f0_hz * 10, 50)
    ideal = section_response(st.section, fs)
    explained = achieved_response(st.section, st.achieved, fs)
    keep = np.abs(ideal) > 10 ** (-30 / 20) * np.max(np.abs(ideal))
    bound = np.max(_db_dev(explained[keep], ideal[keep]))
    # source: ngspice AC analysis (reference simulator); the deviation from the ideal section is
    # the one the achieved f0, Q, gain, zero frequency and zero damping (read back from the circuit) explain
    assert np.max(_db_dev(h[keep], ideal[keep])) <= bound + 0.01
    assert max(abs(st.achieved["f0_error"]), abs(st.achieved["q_error"] or 0.0)) < 0.05


def test_fourth_order_butterworth_lowpass_minus_3db_point():
    approx = design_by_order("lowpass", "butterworth", 4, 1000.0)
    d = design_filter(approx, parts={"resistors": {"series": "E96"}, "capacitors": {"series": "E12"}})
    f, v = run_ngspice_ac(d.netlist)
    mag = 20 * np.log10(np.abs(v["out"]) / np.abs(v["out"][0]))
    i = int(np.argmax(mag < -3.0103))
    # interpolate the crossing on log f between the two samples around it
    f3 = np.exp(np.interp(-3.0103, [mag[i], mag[i - 1]], [np.log(f[i]), np.log(f[i - 1])]))
    # source: ngspice AC analysis (reference simulator); Butterworth -3 dB at the cutoff
    # (S. Butterworth, "On the theory of filter amplifiers", Wireless Engineer 7, 1930)
    assert abs(f3 / 1000.0 - 1) < 0.02
    assert all(c.value in _series_values(c.kind) for s in d.stages for c in s.components)


def _series_values(kind):
    from service.components import series_values_in_range
    if kind == "resistor":
        return set(np.round(series_values_in_range("E96", 1e3, 1e6), 6))
    return set(np.round(series_values_in_range("E12", 100e-12, 10e-6), 18))


def test_mains_notch_rejects_40_db_at_60_hz():
    approx = design_by_requirement("bandstop", "butterworth", (40.0, 90.0), (58.0, 62.0), 1.0, 40.0)
    d = design_filter(approx)
    ref = ngspice_at(d.netlist, [10.0])[0]
    at60 = ngspice_at(d.netlist, [60.0])[0]
    # source: ngspice AC analysis (reference simulator)
    assert 20 * np.log10(ref / at60) >= 40.0
    assert any(w.code == "mains_connection" for w in d.warnings)
