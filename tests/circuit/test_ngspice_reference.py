"""The engine against ngspice's AC analysis of the exported netlist.

source: ngspice AC analysis (reference simulator) -- every comparison below.
These tests fail (never skip) when ngspice is missing.
"""

from __future__ import annotations

import numpy as np
import pytest

from service.circuit import ElementKind, ac_response, to_spice
from tests.circuit.builders import MACRO, catalogue
from tests.ngspice import run_ngspice_ac, run_ngspice_ac_trials

DB_TOL = 1e-3
DEG_TOL = 1e-2
AC = ("dec", 40, 10.0, 100e3)  # three (here four) decades around the filters' corner frequencies

CASES = [(name, model) for model in (None, MACRO) for name in catalogue(model)]
IDS = [f"{name}-{'ideal' if model is None else 'macro'}" for name, model in CASES]


def _compare(h_engine: np.ndarray, h_spice: np.ndarray) -> tuple[float, float]:
    ratio = h_spice / h_engine
    return float(np.max(np.abs(20 * np.log10(np.abs(ratio))))), float(np.max(np.abs(np.angle(ratio, deg=True))))


@pytest.mark.parametrize(("name", "model"), CASES, ids=IDS)
def test_single_circuit_matches_ngspice(name, model):
    ckt = catalogue(model)[name]()
    # source: ngspice AC analysis (reference simulator)
    f, v = run_ngspice_ac(to_spice(ckt, ac=AC))
    assert f.size == 4 * 40 + 1
    h = ac_response(ckt, f)
    assert h.shape == (1, f.size)
    db, deg = _compare(h[0], v["out"])
    assert db < DB_TOL, f"{name}: {db:.3g} dB from ngspice"
    assert deg < DEG_TOL, f"{name}: {deg:.3g} degree from ngspice"


MC_CASES = [("sallen_key", None), ("mfb_bandpass", None), ("state_variable_lp", None), ("lc_ladder", None),
            ("rc3", None), ("butterworth8", MACRO), ("state_variable_hp", MACRO), ("controlled", None)]


@pytest.mark.parametrize(("name", "model"), MC_CASES,
                         ids=[f"{n}-{'ideal' if m is None else 'macro'}" for n, m in MC_CASES])
def test_twenty_monte_carlo_trials_match_ngspice(name, model):
    ckt = catalogue(model)[name](trials=20, seed=7)
    assert ckt.trials == 20
    varied = [el for el in ckt.elements if isinstance(el.value, np.ndarray)]
    assert varied and all(el.kind in (ElementKind.RESISTOR, ElementKind.CAPACITOR, ElementKind.INDUCTOR)
                          for el in varied)
    alters = [{el.name: float(el.value[i]) for el in varied} for i in range(20)]
    # source: ngspice AC analysis (reference simulator), one run altering the parts per trial
    f, v = run_ngspice_ac_trials(to_spice(ckt, ac=AC, trial=0), alters)
    h = ac_response(ckt, f)
    assert h.shape == v["out"].shape == (20, f.size)
    db, deg = _compare(h, v["out"])
    assert db < DB_TOL and deg < DEG_TOL, f"{name}: {db:.3g} dB, {deg:.3g} degree from ngspice"
    # the trials really differ (a Monte Carlo run that varies nothing would pass trivially)
    assert np.ptp(np.abs(h[:, f.size // 2])) > 1e-3 * np.abs(h[0, f.size // 2])


def test_netlist_of_another_trial_matches_that_trial():
    ckt = catalogue(None)["sallen_key"](trials=5, seed=3)
    # source: ngspice AC analysis (reference simulator)
    f, v = run_ngspice_ac(to_spice(ckt, ac=AC, trial=3))
    h = ac_response(ckt, f)
    db, deg = _compare(h[3], v["out"])
    assert db < DB_TOL and deg < DEG_TOL
    db_other, _ = _compare(h[0], v["out"])
    assert db_other > DB_TOL  # and it is not trial 0
