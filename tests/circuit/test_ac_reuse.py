"""PreparedAc.on_grid: another frequency grid from coefficients computed once."""

from __future__ import annotations

import numpy as np

from service.circuit import Circuit, ac_response, prepare_ac


def _sallen_key_pair():
    c = Circuit(title="two Sallen-Key stages")
    c.add_voltage_source("VIN", "in", "0")
    node = "in"
    for i, (r, c1, c2) in enumerate([(10e3, 22e-9, 10e-9), (4.7e3, 47e-9, 4.7e-9)], start=1):
        a, b, out = f"a{i}", f"b{i}", "out" if i == 2 else f"o{i}"
        c.add_resistor(f"R{2 * i - 1}", node, a, r)
        c.add_resistor(f"R{2 * i}", a, b, r)
        c.add_capacitor(f"C{2 * i - 1}", a, out, c1)
        c.add_capacitor(f"C{2 * i}", b, "0", c2)
        c.add_opamp(f"U{i}", plus=b, minus=out, output=out)
        node = out
    return c


def test_on_grid_equals_a_fresh_analysis():
    circuit = _sallen_key_pair()
    prepared = prepare_ac(circuit, np.geomspace(10, 1e5, 301))
    other = np.array([0.0, 3.3, 517.0, 1234.5, 9999.0, 2e5])
    # source: the engine's own fresh analysis on that grid (same circuit, no reuse)
    assert np.allclose(prepared.on_grid(other).response(), ac_response(circuit, other), rtol=1e-12, atol=1e-15)
