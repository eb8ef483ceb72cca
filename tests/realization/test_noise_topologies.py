"""Noise of every topology against ngspice ``.noise`` on the exported netlist.

source: ngspice noise analysis (reference simulator) -- every comparison below: the output noise
density on the sweep and the integrated output noise over it, within 0.1 dB.  These tests fail (never
skip) when ngspice is missing.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from service.circuit import to_spice
from service.realization import TOPOLOGIES, design_filter
from service.realization.supply import filter_circuit
from service.response.noise import analyze_noise
from tests.ngspice import run_ngspice_noise
from tests.realization.spice_checks import one_section, topology_cases

DB_TOL = 0.1
OPAMPS = {
    "macro": {"gbw_hz": 5e6, "rout_ohm": 40.0, "en_nv_rthz": 7.0, "in_pa_rthz": 2.0, "en_corner_hz": 150.0,
              "in_corner_hz": 400.0},
    "white": {"gbw_hz": 1e7, "en_nv_rthz": 15.0, "in_pa_rthz": 0.01},
}


CASES = list(topology_cases())


def test_every_topology_is_covered():
    assert {c.values[0] for c in CASES} == set(TOPOLOGIES)


@pytest.mark.parametrize("opamp", sorted(OPAMPS))
@pytest.mark.parametrize(("topology", "strategy", "section"), CASES)
def test_noise_matches_ngspice(topology, strategy, section, opamp):
    d = design_filter(one_section(section, response=section.kind.value), topology=topology, strategy=strategy,
                      opamp=OPAMPS[opamp])
    fc = filter_circuit(d)
    lo, hi = section.f0_hz / 100, section.f0_hz * 100
    net = to_spice(fc.circuit, ac=None, noise=("dec", 100, lo, hi))
    assert "* noise analysis: output v(out), input source VIN" in net
    # source: ngspice noise analysis (reference simulator)
    ref = run_ngspice_noise(net)
    rep = analyze_noise(fc.circuit, ref["frequency_hz"], (lo, hi), stage_of=fc.stage_of)
    db = 20 * np.log10(rep.output_density_v_rthz / ref["onoise"])
    assert np.max(np.abs(db)) < DB_TOL, f"density {np.max(np.abs(db)):.3g} dB from ngspice"
    total = ref["onoise_total"]
    if not math.isfinite(total):
        # ngspice 39 returns NaN totals beside a deep zero of a source's transfer (the state-variable notches):
        # its power-law integral is written with exp(exponent * ln f), which overflows for the steep slopes
        # there.  The reference is then ngspice's own density, integrated by the trapezoid rule in ln f.
        f, dens = ref["frequency_hz"], ref["onoise"] ** 2
        total = math.sqrt(float(np.sum(0.5 * (dens[1:] * f[1:] + dens[:-1] * f[:-1]) * np.diff(np.log(f)))))
        assert section.kind.value in ("notch", "lowpass_notch", "highpass_notch")
    total_db = 20 * math.log10(rep.output_rms_v / total)
    assert abs(total_db) < DB_TOL, f"integrated noise {total_db:.3g} dB from ngspice"
    # every part of the stage is accounted for: its resistors and its op-amps
    stage = d.stages[0]
    expected = {c.ref for c in stage.components if c.kind == "resistor"} | {u.ref for u in stage.opamps}
    assert {p.name for p in rep.parts} == expected
    assert all(p.stage == 1 for p in rep.parts)
