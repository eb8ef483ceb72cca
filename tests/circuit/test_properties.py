"""Property tests: the staged solve equals the full MNA solve for random part values."""

from __future__ import annotations

import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st

from service.circuit import Circuit, OpAmpModel, ac_response

F = np.logspace(1, 5, 61)

resistance = st.floats(min_value=100.0, max_value=1e6)
capacitance = st.floats(min_value=10e-12, max_value=1e-6)


@settings(max_examples=40, deadline=None)
@given(r=st.lists(resistance, min_size=4, max_size=4), c=st.lists(capacitance, min_size=4, max_size=4),
       gbw=st.one_of(st.none(), st.floats(min_value=1e5, max_value=1e8)))
def test_random_two_stage_filter_staged_equals_full(r, c, gbw):
    model = None if gbw is None else OpAmpModel(gbw_hz=gbw, a0=2e5)
    ckt = Circuit("random")
    ckt.add_voltage_source("VIN", "in", "0")
    # Sallen-Key lowpass stage, then an MFB-style inverting stage with an RC load between them
    ckt.add_resistor("R1", "in", "a", r[0])
    ckt.add_resistor("R2", "a", "b", r[1])
    ckt.add_capacitor("C1", "a", "o1", c[0])
    ckt.add_capacitor("C2", "b", "0", c[1])
    ckt.add_opamp("U1", "b", "o1", "o1", model=model)
    ckt.add_resistor("R3", "o1", "m", r[2])
    ckt.add_capacitor("C3", "m", "out", c[2])
    ckt.add_resistor("R4", "m", "out", r[3])
    ckt.add_capacitor("C4", "out", "0", c[3])
    ckt.add_opamp("U2", "0", "m", "out", model=model)
    hs = ac_response(ckt, F, method="staged")
    hf = ac_response(ckt, F, method="full")
    ratio = hs / hf
    assert np.max(np.abs(20 * np.log10(np.abs(ratio)))) < 1e-6
    assert np.max(np.abs(np.angle(ratio, deg=True))) < 1e-5
