"""Supplies: the single-rail circuit in ngspice (.op and AC), offsets, added parts, bad input.

These tests fail (never skip) when ngspice is missing.
"""

from __future__ import annotations

import re

import numpy as np
import pytest

from service.approximation import Section, SectionKind, design_by_order
from service.realization import TOPOLOGIES, design_filter
from service.realization.cascade import analysis_grid
from service.realization.errors import RealizationError
from service.realization.supply import Supply, filter_circuit, supply_report
from tests.ngspice import run_ngspice_ac, run_ngspice_op
from tests.realization.spice_checks import SECTIONS, one_section

OPAMP = {"gbw_hz": 5e6, "vos_v": 1.2e-3, "ib_a": 40e-9, "rail_headroom_v": 0.15, "en_nv_rthz": 9.0}
RAIL = {"v_pos": 5.0, "v_neg": 0.0}
PASSBAND_DB = 0.01


def _topology_cases():
    for name, topo in sorted(TOPOLOGIES.items()):
        for (kind, order), sec in SECTIONS.items():
            if kind not in topo.kinds or order != topo.order:
                continue
            strategy = next((s for s in topo.strategy_names(kind) if s in _strategies(topo, sec)), None)
            if strategy is not None:
                yield pytest.param(name, strategy, sec, id=f"{name}-{kind.value}{order}-{strategy}")


def _strategies(topo, sec):
    try:
        return topo.strategies(sec)
    except Exception:
        return ()


CASCADES = {
    "lowpass-butterworth6": lambda: design_filter(design_by_order("lowpass", "butterworth", 6, 1000.0), opamp=OPAMP),
    "highpass-chebyshev4": lambda: design_filter(design_by_order("highpass", "chebyshev1", 4, 500.0,
                                                                 passband_ripple_db=0.5), opamp=OPAMP),
    "bandpass-butterworth4": lambda: design_filter(design_by_order("bandpass", "butterworth", 4, [800.0, 1250.0]),
                                                   opamp=OPAMP),
    "bandstop-elliptic4": lambda: design_filter(design_by_order("bandstop", "elliptic", 4, [900.0, 1100.0],
                                                                passband_ripple_db=0.5,
                                                                stopband_attenuation_db=40), opamp=OPAMP),
    "lowpass-inverting5": lambda: design_filter(design_by_order("lowpass", "bessel", 5, 2000.0), opamp=OPAMP,
                                                topology=["inverting_first_order", "multiple_feedback",
                                                          "multiple_feedback"]),
}


def _designs():
    for name, make in CASCADES.items():
        yield pytest.param(make, "buffered", id=f"{name}-buffered")
    yield pytest.param(CASCADES["lowpass-butterworth6"], "divider", id="lowpass-butterworth6-divider")
    for p in _topology_cases():
        name, strategy, sec = p.values
        yield pytest.param(lambda name=name, strategy=strategy, sec=sec: design_filter(
            one_section(sec, response=sec.kind.value), topology=name, strategy=strategy, opamp=OPAMP),
            "buffered", id=p.id)


DESIGNS = list(_designs())


@pytest.mark.parametrize(("make", "mid_rail"), DESIGNS)
def test_single_rail_operating_point_matches_ngspice(make, mid_rail):
    d = make()
    rep = supply_report(d, supply=RAIL, mid_rail=mid_rail)
    assert "VPOS vpos 0 DC 5" in rep.netlist
    nodes = [b.node for b in rep.opamp_bias]
    # source: ngspice operating point (reference simulator)
    ref = run_ngspice_op(rep.netlist, nodes)
    for b in rep.opamp_bias:
        assert ref[b.node] == pytest.approx(b.dc_v, abs=1e-6), b.ref
        # mid-rail plus the computed offset; the rest is the op-amps' finite DC gain (A0 = 100 dB here)
        # times the stage's DC noise gain, up to about 10 in the notch stages: 2.5 V * 10 / 1e5 = 2.5e-4 V
        assert b.dc_v - b.offset_v == pytest.approx(2.5, abs=5e-4), b.ref
        assert b.within is True and b.low_v == pytest.approx(0.15) and b.high_v == pytest.approx(4.85)
    assert rep.output_offset_v == pytest.approx(
        [b.offset_v for b in rep.opamp_bias if b.node == "out"][0], abs=1e-15)


@pytest.mark.parametrize("coupling", ["auto", "ac"])
@pytest.mark.parametrize(("make", "mid_rail"), DESIGNS)
def test_single_rail_keeps_the_passband(make, mid_rail, coupling):
    d = make()
    rep = supply_report(d, supply=RAIL, mid_rail=mid_rail, input_coupling=coupling)
    ac = re.search(r"^\.ac .*$", d.netlist, re.M).group(0)
    single = re.sub(r"^\.ac .*$", ac, rep.netlist, flags=re.M)
    # source: ngspice AC analysis (reference simulator): the single-rail netlist against the design's own
    f, v0 = run_ngspice_ac(d.netlist)
    _, v1 = run_ngspice_ac(single)
    h0, h1 = np.abs(v0["out"]), np.abs(v1["out"])
    # the passband within the analysis span (1/100 of the lowest section frequency and up), as the service checks
    band = (h0 >= h0.max() / np.sqrt(2)) & (f >= analysis_grid([s.section for s in d.stages])[0] * (1 - 1e-9))
    change = np.max(np.abs(20 * np.log10(h1[band] / h0[band])))
    if coupling == "ac" and h0[0] >= h0.max() / np.sqrt(2):
        assert any(w.code == "input_ac_coupled_dc_passband" for w in rep.warnings)
    if mid_rail == "buffered" and coupling == "auto":
        assert rep.ac_change_db < PASSBAND_DB
    if rep.ac_change_db < PASSBAND_DB:
        # the service keeps the passband: the simulator agrees
        assert change < PASSBAND_DB, f"{change:.3g} dB in the passband"
    else:
        # the service reports the change (a divider's impedance, or a coupling beyond its largest part)
        assert change == pytest.approx(rep.ac_change_db, rel=0.2)


def test_added_parts_continue_the_numbering_and_join_the_bom():
    d = CASCADES["bandpass-butterworth4"]()
    rep = supply_report(d, supply=RAIL, input_coupling="ac")
    assert rep.input_coupling == "ac"
    refs = [r["ref"] for r in d.bom]
    n_r = max(int(r[1:]) for r in refs if r.startswith("R"))
    n_c = max(int(r[1:]) for r in refs if r.startswith("C"))
    n_u = max(int(r[1:]) for r in refs if r.startswith("U"))
    added = [c.ref for c in rep.components] + [u.ref for u in rep.opamps]
    assert sorted(added) == sorted([f"R{n_r + 1}", f"R{n_r + 2}", f"C{n_c + 1}", f"U{n_u + 1}", f"C{n_c + 2}",
                                    f"R{n_r + 3}"])
    bom_refs = [r["ref"] for r in rep.bom]
    assert len(bom_refs) == len(set(bom_refs)) == len(refs) + len(added)
    for ref in added:
        assert re.search(rf"^X?{ref} ", rep.netlist, re.M), ref
    roles = {c.role for c in rep.components} | {u.role for u in rep.opamps}
    assert roles == {"bias_top", "bias_bottom", "bias_decoupling", "mid_rail_buffer", "input_coupling",
                     "input_bias"}


def test_input_coupling_choices():
    lp = CASCADES["lowpass-butterworth6"]()
    assert supply_report(lp, supply=RAIL).input_coupling == "dc"
    assert "VIN in vmid AC 1" in supply_report(lp, supply=RAIL).netlist
    hp = CASCADES["highpass-chebyshev4"]()
    assert supply_report(hp, supply=RAIL).input_coupling == "none"     # the Sallen-Key highpass blocks DC itself
    assert supply_report(hp, supply=RAIL, input_coupling="ac").input_coupling == "ac"
    assert any(w.code == "input_mid_rail" for w in supply_report(lp, supply=RAIL).warnings)


def test_split_rails_leave_the_circuit_and_report_offsets():
    d = CASCADES["lowpass-inverting5"]()
    rep = supply_report(d, supply={"v_pos": 12.0, "v_neg": -12.0})
    assert rep.components == [] and rep.opamps == [] and rep.ac_change_db is None
    assert "VPOS" not in rep.netlist and rep.bias_v == 0.0
    for b in rep.opamp_bias:
        assert b.dc_v == pytest.approx(b.offset_v, abs=1e-12)
        assert (b.low_v, b.high_v) == (pytest.approx(-11.85), pytest.approx(11.85))
    # the stages' own shares add up to the output offset
    assert sum(s.share_at_output_v for s in rep.stage_offsets) == pytest.approx(rep.output_offset_v, rel=1e-9)
    ref = run_ngspice_op(re.sub(r"^\.ac .*$", ".op", rep.netlist, flags=re.M), ["out"])
    # source: ngspice operating point (reference simulator)
    assert ref["out"] == pytest.approx(rep.output_offset_v, abs=1e-9)


def test_dc_outside_the_swing_is_warned():
    op = dict(OPAMP, vos_v=5e-3, rail_headroom_v=None, output_swing_v=0.01)
    sec = Section(SectionKind.LOWPASS, 2, 1000.0, 0.7071, None, 10.0)
    d = design_filter(one_section(sec), opamp=op, strategy="given_gain", topology="sallen_key")
    rep = supply_report(d, supply={"v_pos": 15.0, "v_neg": -15.0})
    assert any(w.code == "dc_outside_swing" for w in rep.warnings)
    assert any(b.within is False for b in rep.opamp_bias)


def test_high_voltage_caution():
    d = CASCADES["lowpass-butterworth6"]()
    rep = supply_report(d, supply={"v_pos": 40.0, "v_neg": -40.0})
    assert any(w.code == "high_voltage" and "qualified" in w.message for w in rep.warnings)


@pytest.mark.parametrize(("supply", "field"), [
    ({"v_pos": 0.0, "v_neg": 0.0}, "supply"), ({"v_pos": -5.0, "v_neg": 0.0}, "supply"),
    ({"v_pos": 5.0, "v_neg": 5.0}, "supply"), ({"v_pos": 3.0, "v_neg": 1.0}, "supply.v_neg"),
    ({"v_pos": 1e4, "v_neg": 0.0}, "supply.v_pos"), ({"v_pos": float("nan")}, "supply.v_pos"),
    ({"v_pos": "5"}, "supply.v_pos"), ({"v_neg": -5.0}, "supply.v_pos"), ({"v_pos": 5, "vcc": 5}, "supply.vcc"),
    ("5V", "supply"),
])
def test_bad_supply_names_the_field(supply, field):
    with pytest.raises(RealizationError) as err:
        Supply.from_dict(supply)
    assert err.value.field == field


def test_rail_headroom_beyond_the_span():
    d = design_filter(design_by_order("lowpass", "butterworth", 4, 1000.0), opamp={"gbw_hz": 5e6})
    with pytest.raises(RealizationError) as err:
        filter_circuit(d, supply={"v_pos": 3.0, "v_neg": 0.0}, opamp={"rail_headroom_v": 1.6})
    assert err.value.field == "opamp.rail_headroom_v"


@pytest.mark.parametrize(("kwargs", "field"), [({"mid_rail": "zener"}, "supply.mid_rail"),
                                                ({"input_coupling": "magnetic"}, "supply.input_coupling")])
def test_bad_options(kwargs, field):
    with pytest.raises(RealizationError) as err:
        filter_circuit(CASCADES["lowpass-butterworth6"](), supply=RAIL, **kwargs)
    assert err.value.field == field


def test_with_supply_and_documents_carry_the_figures():
    from service.errors import RolloffError
    from service.realization import with_supply
    from service.workflows import DesignDocument, outcome_of
    d = CASCADES["lowpass-butterworth6"]()
    same, none = with_supply(d, supply=None)
    assert same is d and none is None
    d2, rep = with_supply(d, supply=RAIL)
    assert d2.netlist == rep.netlist and "VPOS vpos 0 DC 5" in d2.netlist
    assert len(d2.bom) == len(d.bom) + 4 and d.netlist != d2.netlist
    # an edited document keeps its op-amp figures: the same operating point from the document
    doc = outcome_of(d).as_dict()
    same_doc = supply_report(DesignDocument.from_json(doc, "design").plans("design"), supply=RAIL)
    assert [x.offset_v for x in same_doc.opamp_bias] == pytest.approx([x.offset_v for x in rep.opamp_bias], abs=1e-12)
    doc["stages"][0]["opamps"][0]["vos_v"] = -3e-3
    rep_doc = supply_report(DesignDocument.from_json(doc, "design").plans("design"), supply=RAIL)
    u1 = doc["stages"][0]["opamps"][0]["ref"]
    b = {x.ref: x for x in rep_doc.opamp_bias}[u1]
    b0 = {x.ref: x for x in rep.opamp_bias}[u1]
    # the offset moves by the change of vos times the stage's DC noise gain (1 + Rf/Rg >= 1)
    assert b.offset_v - b0.offset_v <= -4.2e-3 * (1 - 1e-6)
    doc["stages"][0]["opamps"][0]["en_nv_rthz"] = -1.0
    with pytest.raises(RolloffError) as err:
        supply_report(DesignDocument.from_json(doc, "design").plans("design"), supply=RAIL)
    assert err.value.field == "design.stages[0].opamps[0].en_nv_rthz"
