"""Sampled trials rebuilt as netlists and run in ngspice (the reference simulator)."""

from __future__ import annotations

import numpy as np

from service.circuit import to_spice
from service.realization import cascade_circuit
from tests.tolerance.conftest import plans_of, run_tolerance
from tests.ngspice import run_ngspice_ac

from .conftest import GRID, PASSBAND_EDGE_HZ


def test_fifty_trials_agree_with_ngspice(butter8_sk, lowpass_mask):
    # source: ngspice AC analysis (reference simulator)
    n = 50
    r = run_tolerance(butter8_sk, trials=1000, seed=21, frequencies_hz=GRID, mask=lowpass_mask, include_trials=n)
    refs = list(r.trials[0]["values"])
    values = {ref: np.array([t["values"][ref] for t in r.trials]) for ref in refs}
    circuit = cascade_circuit(plans_of(butter8_sk)).with_values(values)
    worst = 0.0
    for i, t in enumerate(r.trials):
        net = to_spice(circuit, trial=i, output="out", ac=("dec", 125, 10.0, 100e3))
        f, v = run_ngspice_ac(net)
        g = 20 * np.log10(np.abs(v["out"]))
        for e in t["edges"]:
            k = int(np.argmin(np.abs(f - e["frequency_hz"])))
            assert abs(f[k] / e["frequency_hz"] - 1) < 1e-9
            worst = max(worst, abs(g[k] - e["gain_db"]))
        # the passband reference (largest passband gain) is at or above every ngspice passband sample
        assert np.max(g[f <= PASSBAND_EDGE_HZ * (1 + 1e-9)]) <= t["reference_gain_db"] + 1e-3
    assert worst < 1e-3
