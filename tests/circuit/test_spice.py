"""SPICE export: value notation, names, subcircuits, directives; the ngspice transient helper."""

from __future__ import annotations

import math
import re

import numpy as np
import pytest

from service.circuit import Circuit, CircuitError, OpAmpModel, format_value, to_spice
from tests.circuit.builders import MACRO, loaded_macromodel, rc_ladder, sallen_key_lowpass
from tests.ngspice import run_ngspice_tran

_SUFFIX = {"T": 1e12, "G": 1e9, "Meg": 1e6, "k": 1e3, "m": 1e-3, "u": 1e-6, "n": 1e-9, "p": 1e-12, "f": 1e-15, "": 1.0}


def _parse(text: str) -> float:
    m = re.fullmatch(r"([-+0-9.eE]+)(Meg|[TGkmunpf]?)", text)
    assert m, text
    return float(m.group(1)) * _SUFFIX[m.group(2)]


@pytest.mark.parametrize(("value", "text"), [(1.5e6, "1.5Meg"), (4.7e-9, "4.7n"), (10e3, "10k"), (1.0, "1"),
                                             (2.2e-6, "2.2u"), (1e-3, "1m"), (0.0, "0"), (-3.3e3, "-3.3k"),
                                             (100e-12, "100p"), (1e9, "1G")])
def test_format_value(value, text):
    # common practice (no source): SPICE reads "M" as milli, so mega is "Meg"
    assert format_value(value) == text


@pytest.mark.parametrize("value", [1.0037234567891e4, 3.14159265358979e-9, 999.9999999999, 1e-20, 7.5e15, 1234567.0])
def test_format_value_round_trips(value):
    text = format_value(value)
    assert not text.endswith("M")
    parsed = float(text) if re.fullmatch(r"[-+0-9.]+e[-+]?[0-9]+", text) else _parse(text)
    assert parsed == pytest.approx(value, rel=1e-14)


def test_netlist_lines():
    ckt = sallen_key_lowpass(None)
    ckt.add_opamp("U2", "out", "o2", "o2", model=MACRO)
    ckt.add_opamp("XU3", "o2", "o3", "o3", model=None)
    ckt.add_resistor("RL", "o3", "0", 1e3)
    net = to_spice(ckt, ac=("dec", 125, 10.0, 100e3), title="stage 1")
    lines = net.splitlines()
    assert lines[0] == "stage 1"
    assert "VIN in 0 AC 1" in lines
    assert "R1 in a 10k" in lines
    assert "XU1 b out out OPAMP_IDEAL" in lines
    assert "XU2 out o2 o2 GENERIC" in lines
    assert "XU3 o2 o3 o3 OPAMP_IDEAL" in lines        # already an X name: kept
    assert lines.count(".subckt OPAMP_IDEAL inp inn out") == 1
    assert lines.count(".subckt GENERIC inp inn out") == 1
    assert ".ac dec 125 10 100k" in lines
    assert lines[-1] == ".end" and net.endswith("\n")
    assert ".control" not in net


def test_macromodel_subcircuit_values():
    # A(s) = gm*R/(1 + s R C) with R = 1 ohm: gm = a0 and C = a0/wt
    net = to_spice(loaded_macromodel())
    assert "G1 0 p inp inn 200k" in net
    c = _parse(re.search(r"^C1 p 0 (\S+)$", net, re.M).group(1))
    assert c == pytest.approx(2e5 / (2 * math.pi * 1e6), rel=1e-14)
    assert "R2 o out 75" in net


def test_distinct_models_with_one_name_get_distinct_subcircuits():
    ckt = rc_ladder(1)
    ckt.add_opamp("U1", "out", "a", "a", model=OpAmpModel(gbw_hz=1e6))
    ckt.add_opamp("U2", "a", "b", "b", model=OpAmpModel(gbw_hz=2e6))
    ckt.add_opamp("U3", "b", "c", "c", model=OpAmpModel(gbw_hz=1e6))
    net = to_spice(ckt, output="c")
    assert net.count(".subckt ") == 2
    assert "XU1 out a a OPAMP" in net and "XU2 a b b OPAMP_2" in net and "XU3 b c c OPAMP" in net


def test_element_names_get_their_type_letter():
    c = Circuit()
    c.add_voltage_source("VIN", "in", "0")
    c.add_resistor("Rin", "in", "out", 1e3)
    c.add_capacitor("Cload", "out", "0", 1e-9)
    c.add_resistor("Load", "out", "0", 1e3)   # not an R name: prefixed
    net = to_spice(c)
    assert "Rin in out 1k" in net and "RLoad out 0 1k" in net


def test_trial_selects_values():
    ckt = rc_ladder(1, trials=3, seed=1)
    r2 = float(ckt.element("R1").value[2])
    assert f"R1 in out {format_value(r2)}" in to_spice(ckt, trial=2)
    with pytest.raises(CircuitError, match="trial"):
        to_spice(ckt, trial=3)


def test_bad_ac_rejected():
    with pytest.raises(CircuitError, match="ac"):
        to_spice(rc_ladder(1), ac=("log", 10, 1.0, 10.0))
    with pytest.raises(CircuitError, match="ac"):
        to_spice(rc_ladder(1), ac=("dec", 10, 10.0, 1.0))


def test_transient_helper_rc_step():
    # common practice (no source): an RC lowpass step response is 1 - exp(-t/RC)
    r, c = 1e3, 1e-6
    t, v = run_ngspice_tran(to_spice(rc_ladder(1, r=r, c=c)), tstep=1e-5, tstop=5e-3)
    # source: ngspice transient analysis (reference simulator)
    assert t[-1] == pytest.approx(5e-3)
    sel = t > 1e-4
    np.testing.assert_allclose(v["out"][sel], 1 - np.exp(-t[sel] / (r * c)), atol=2e-3)


def test_supply_and_dc_sources_in_the_subcircuit():
    from service.circuit import OpAmpSources
    ckt = sallen_key_lowpass(None).with_opamp_sources({"U1": OpAmpSources(vos_v=-2e-3, ib_a=15e-9)})
    ckt.add_supply("VPOS", "vp", "0", 5.0)
    ckt.add_resistor("RB", "vp", "0", 10e3)
    net = to_spice(ckt, op=True)
    lines = net.splitlines()
    assert "VPOS vp 0 DC 5" in lines
    assert ".op" in lines and ".ac dec 125 10 100k" in lines
    # the ideal op-amp gets its own subcircuit with the offset in series with + and the bias currents
    assert ".subckt OPAMP_IDEAL inp inn out" in lines
    assert "VOS inp_v inp DC -2m" in lines and "IBP inp 0 DC 15n" in lines and "IBN inn 0 DC 15n" in lines
    assert f"E1 out 0 inp_v inn {format_value(1e9)}" in lines
    assert ".temp" not in net                       # no noise generators, no noise analysis
    with pytest.raises(CircuitError) as err:
        to_spice(ckt, noise=("log", 10, 1.0, 10.0))
    assert err.value.field == "noise"
