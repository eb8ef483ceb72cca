"""DC operating point: closed forms, superposition, ngspice ``.op``.

These tests fail (never skip) when ngspice is missing.
"""

from __future__ import annotations

import numpy as np
import pytest

from service.circuit import (Circuit, CircuitError, OpAmpModel, OpAmpSources, dc_contributions, dc_operating_point,
                             to_spice)
from tests.circuit.builders import MACRO, catalogue, sallen_key_lowpass
from tests.ngspice import run_ngspice_op

ERRORS = OpAmpSources(vos_v=1.5e-3, ib_a=80e-9)


def _noninverting(model=None, rs=10e3, rg=1e3, rf=9e3):
    c = Circuit()
    c.add_voltage_source("VIN", "in", "0")
    c.add_resistor("RS", "in", "p", rs)
    c.add_resistor("RG", "m", "0", rg)
    c.add_resistor("RF", "out", "m", rf)
    c.add_opamp("U1", "p", "m", "out", model=model, sources=ERRORS)
    return c


def test_noninverting_amplifier_offset_closed_form():
    # source: S. Franco, Design with Operational Amplifiers and Analog Integrated Circuits, 4th ed., 2015,
    # sec. 5.4 (input offset error: Eo = (1 + R2/R1) [Vos - Rp Ip] + R2 In), from memory
    rs, rg, rf = 10e3, 1e3, 9e3
    sol = dc_operating_point(_noninverting(rs=rs, rg=rg, rf=rf))
    expected = (1 + rf / rg) * (ERRORS.vos_v - rs * ERRORS.ib_a) + rf * ERRORS.ib_a
    assert float(sol.voltage("out")[0]) == pytest.approx(expected, rel=1e-12)
    # the source's branch carries the bias current drawn through RS
    assert float(sol.currents["VIN"][0]) == pytest.approx(-ERRORS.ib_a, rel=1e-9)


def test_finite_gain_macromodel():
    # common practice (no source): a finite open-loop gain a0 divides the ideal closed-loop result by 1 + 1/(a0 beta)
    a0 = 2e4
    ideal = float(dc_operating_point(_noninverting()).voltage("out")[0])
    sol = dc_operating_point(_noninverting(OpAmpModel(gbw_hz=1e6, a0=a0)))
    assert float(sol.voltage("out")[0]) == pytest.approx(ideal / (1 + 10 / a0), rel=1e-12)


def test_supply_and_divider():
    c = Circuit()
    c.add_voltage_source("VIN", "in", "0")
    c.add_resistor("R0", "in", "0", 1e3)
    c.add_supply("VPOS", "vpos", "0", 12.0)
    c.add_resistor("R1", "vpos", "d", 30e3)
    c.add_resistor("R2", "d", "0", 10e3)
    c.add_capacitor("C1", "d", "0", 1e-6)
    sol = dc_operating_point(c)
    assert float(sol.voltage("d")[0]) == pytest.approx(3.0, rel=1e-14)
    assert float(sol.voltage("0")[0]) == 0.0
    # an AC analysis sees the supply as a short: nothing reaches d from the input
    from service.circuit import ac_response
    assert np.all(ac_response(c, np.array([1.0, 1e3]), output="d") == 0)


def test_superposition_by_groups_adds_up():
    ckt = catalogue(MACRO)["state_variable_lp"]()
    ops = [el.name for el in ckt.elements if el.kind.value == "opamp"]
    ckt = ckt.with_opamp_sources({u: OpAmpSources(vos_v=(k + 1) * 1e-3, ib_a=(k - 1) * 30e-9)
                                  for k, u in enumerate(ops)})
    whole = dc_operating_point(ckt, input_dc_v=0.2)
    parts = dc_contributions(ckt, {u: [u] for u in ops} | {"input": ["VIN"]}, input_dc_v=0.2)
    for node in ("out", "hp", "bp"):
        total = sum(float(p.voltage(node)[0]) for p in parts.values())
        assert total == pytest.approx(float(whole.voltage(node)[0]), rel=1e-9, abs=1e-15)


CASES = [(name, model) for model in (None, MACRO, OpAmpModel(gbw_hz=1e6, a0=2e5, rout_ohm=75.0))
         for name in ("sallen_key", "sallen_key_gain", "mfb_bandpass", "state_variable_lp", "controlled",
                      "lc_ladder", "macro_rout")]


@pytest.mark.parametrize(("name", "model"), CASES, ids=[f"{n}-{i}" for i, (n, m) in enumerate(CASES)])
def test_operating_point_matches_ngspice(name, model):
    ckt = catalogue(model)[name]()
    ops = [el.name for el in ckt.elements if el.kind.value == "opamp"]
    ckt = ckt.with_opamp_sources({u: OpAmpSources(vos_v=(-1) ** k * 2e-3, ib_a=50e-9 * (k + 1))
                                  for k, u in enumerate(ops)})
    ckt.add_supply("VPOS", "vpos", "0", 5.0)
    ckt.add_resistor("RB1", "vpos", "vb", 10e3)
    ckt.add_resistor("RB2", "vb", "0", 20e3)
    nodes = list(ckt.nodes)
    # source: ngspice operating point (reference simulator)
    ref = run_ngspice_op(to_spice(ckt, ac=None, op=True), nodes)
    sol = dc_operating_point(ckt)
    for n in nodes:
        assert float(sol.voltage(n)[0]) == pytest.approx(ref[n], rel=1e-6, abs=1e-9), n


def test_no_dc_path_is_reported():
    c = Circuit()
    c.add_voltage_source("VIN", "in", "0")
    c.add_capacitor("C1", "in", "p", 1e-9)
    c.add_opamp("U1", "p", "out", "out")
    with pytest.raises(CircuitError, match="'p' has no DC path") as err:
        dc_operating_point(c)
    assert err.value.field == "circuit"


def test_integrator_without_dc_feedback_is_reported():
    c = Circuit()
    c.add_voltage_source("VIN", "in", "0")
    c.add_resistor("R1", "in", "m", 1e3)
    c.add_capacitor("C1", "m", "out", 1e-9)
    c.add_opamp("U1", "0", "m", "out", sources=ERRORS)
    with pytest.raises(CircuitError, match="no unique DC operating point"):
        dc_operating_point(c)


def test_trials_and_bad_groups():
    ckt = sallen_key_lowpass(None, gain=2.0, trials=3).with_opamp_sources({"U1": ERRORS})
    sol = dc_operating_point(ckt)
    assert sol.voltage("out").shape == (3,)
    with pytest.raises(CircuitError) as err:
        dc_contributions(ckt, {"x": ["U9"]})
    assert err.value.field == "groups"
    with pytest.raises(CircuitError):
        dc_operating_point(ckt, input_dc_v=float("nan"))
