"""The design document: round trip, edits, and strict reading."""

from __future__ import annotations

import copy
import json

import numpy as np
import pytest

from service.approximation import design_by_order, design_by_requirement
from service.realization import (
    RealizationError, design_filter, design_to_circuit, document_from_design, evaluate_document,
)
from service.realization.errors import InvalidDocument, UnknownPartKind, UnknownTopology
from service.circuit import ac_response


@pytest.fixture(scope="module")
def design():
    approx = design_by_requirement("lowpass", "elliptic", 1000.0, 1600.0, 0.5, 40.0)
    return design_filter(approx, requirement={"passband_hz": 1000.0, "stopband_hz": 1600.0})


@pytest.fixture()
def doc(design):
    return copy.deepcopy(document_from_design(design))


def test_document_is_plain_json_with_public_fields(doc):
    text = json.dumps(doc, allow_nan=False)
    back = json.loads(text)
    for key in ("response", "family", "order", "stages", "requirement", "bom", "netlist", "summary", "warnings"):
        assert key in back
    st = back["stages"][0]
    for key in ("section", "topology", "strategy", "components", "opamps", "achieved", "peak_gain_db",
                "peak_frequency_hz", "opamp_requirement"):
        assert key in st
    for c in st["components"]:
        assert {"ref", "kind", "value", "ideal", "tolerance", "part_id"} <= set(c)
        if c["kind"] == "capacitor":
            assert "dielectric" in c
    for row in back["bom"]:
        assert set(row) == {"ref", "kind", "value", "tolerance", "dielectric", "part_id"}
    assert "VIN in 0 AC 1" in back["netlist"]
    assert set(back["summary"]) == {"edges", "meets"}


def test_refs_unique_and_numbered_in_stage_order(doc):
    refs = [c["ref"] for st in doc["stages"] for c in st["components"]]
    refs += [u["ref"] for st in doc["stages"] for u in st["opamps"]]
    assert len(refs) == len(set(refs))
    for prefix in ("R", "C", "U"):
        nums = [int(r[1:]) for r in refs if r[0] == prefix]
        assert nums == list(range(1, len(nums) + 1))


def test_netlist_elements_are_the_refs(doc):
    lines = doc["netlist"].splitlines()
    names = {ln.split()[0] for ln in lines if ln and ln[0] in "RC"}
    refs = {c["ref"] for st in doc["stages"] for c in st["components"]}
    assert refs <= names
    assert all(f"XU{i}" in doc["netlist"] for i in range(1, 3))


def test_evaluate_reproduces_achieved(design, doc):
    again = evaluate_document(doc)
    for a, b in zip(design.stages, again.stages):
        for key in ("f0_hz", "q", "gain", "fz_hz"):
            if a.achieved[key] is None:
                assert b.achieved[key] is None
            else:
                assert b.achieved[key] == pytest.approx(a.achieved[key], rel=1e-12)
        assert b.peak_gain_db == pytest.approx(a.peak_gain_db, abs=1e-9)
    assert again.summary["meets"] == design.summary["meets"]
    for ra, rb in zip(design.summary["edges"], again.summary["edges"]):
        assert rb["loss_db"] == pytest.approx(ra["loss_db"], abs=1e-9)
    assert again.netlist == design.netlist
    assert again.bom == design.bom


def test_edited_value_changes_figures(design, doc):
    comp = next(c for c in doc["stages"][1]["components"] if c["kind"] == "capacitor")
    comp["value"] *= 1.2
    again = evaluate_document(doc)
    a, b = design.stages[1].achieved, again.stages[1].achieved
    assert b["f0_hz"] != pytest.approx(a["f0_hz"], rel=1e-3)
    assert again.stages[0].achieved["f0_hz"] == pytest.approx(design.stages[0].achieved["f0_hz"], rel=1e-12)
    line = next(ln for ln in again.netlist.splitlines() if ln.startswith(comp["ref"] + " "))
    assert line != next(ln for ln in design.netlist.splitlines() if ln.startswith(comp["ref"] + " "))


def test_removed_part_is_named(doc):
    removed = doc["stages"][1]["components"].pop(2)
    with pytest.raises(InvalidDocument) as e:
        evaluate_document(doc)
    assert e.value.field == "design.stages[1].components"
    assert removed["role"] in e.value.message


def test_repeated_ref_is_an_error(doc):
    doc["stages"][1]["components"][0]["ref"] = doc["stages"][0]["components"][0]["ref"]
    with pytest.raises(InvalidDocument) as e:
        evaluate_document(doc)
    assert e.value.field == "design.stages[1].components[0].ref"
    assert "repeats" in e.value.message


def test_wrong_kind_is_an_error(doc):
    comp = next(c for c in doc["stages"][1]["components"] if c["kind"] == "resistor")
    comp["kind"] = "capacitor"
    with pytest.raises(InvalidDocument) as e:
        evaluate_document(doc)
    assert e.value.field.endswith(".kind")
    assert "needs a resistor" in e.value.message


def test_unknown_kind_and_topology(doc):
    d1 = copy.deepcopy(doc)
    d1["stages"][0]["components"][0]["kind"] = "inductor"
    with pytest.raises(UnknownPartKind):
        evaluate_document(d1)
    d2 = copy.deepcopy(doc)
    d2["stages"][0]["topology"] = "ladder"
    with pytest.raises(UnknownTopology) as e:
        evaluate_document(d2)
    assert e.value.field == "design.stages[0].topology"


def test_roles_optional_assigned_in_topology_order(design, doc):
    for st in doc["stages"]:
        for c in st["components"]:
            del c["role"]
        for u in st["opamps"]:
            del u["role"]
    again = evaluate_document(doc)
    assert again.stages[1].achieved["f0_hz"] == pytest.approx(design.stages[1].achieved["f0_hz"], rel=1e-12)


def test_design_to_circuit_matches_netlist_model(design, doc):
    f = np.array([100.0, 1000.0, 1500.0])
    a = ac_response(design_to_circuit(design), f)
    b = ac_response(design_to_circuit(doc, opamp_model="ideal"), f)
    np.testing.assert_allclose(a, b, rtol=1e-9)
    with pytest.raises(RealizationError) as e:
        design_to_circuit(doc, opamp_model="spice")
    assert e.value.field == "opamp_model"


def test_bad_inputs_raise_with_field():
    approx = design_by_order("lowpass", "butterworth", 4, 1000.0)
    cases = [
        (dict(parts={"resistors": {"series": "E7"}}), "parts.resistors.series"),
        (dict(parts={"inductors": {"series": "E12"}}), "parts.inductors"),
        (dict(parts={"capacitors": {"series": "E6", "min_value": 1.1e-9, "max_value": 1.4e-9}}), "parts.capacitors"),
        (dict(parts={"capacitors": {"stock": [{"value": -1.0, "tolerance": 0.05}]}}), "parts.capacitors.stock"),
        (dict(topology="ladder"), "topology"),
        (dict(topology=["sallen_key"]), "topology"),
        (dict(topology="twin_t_notch"), "topology"),
        (dict(strategy="constant_q"), "strategy"),
        (dict(section_order="random"), "section_order"),
        (dict(opamp={"gbw_hz": -1.0}), "opamp.gbw_hz"),
    ]
    for kwargs, field in cases:
        with pytest.raises(RealizationError) as e:
            design_filter(approx, **kwargs)
        assert e.value.field == field, (kwargs, e.value.field, e.value.message)
        assert e.value.message


def test_sallen_key_cannot_do_a_notch():
    approx = design_by_requirement("bandstop", "chebyshev2", (40.0, 90.0), (57.0, 63.0), 1.0, 40.0)
    with pytest.raises(RealizationError) as e:
        design_filter(approx, topology="sallen_key")
    assert e.value.field == "topology"
    assert "notch" in e.value.message


def test_roundtrip_with_a_given_opamp_keeps_macromodel_figures():
    approx = design_by_order("highpass", "chebyshev1", 5, 2000.0, passband_ripple_db=0.5)
    d = design_filter(approx, opamp={"gbw_hz": 1e6, "slew_v_per_us": 0.5, "a0_db": 100.0, "part_id": "OA-7"})
    doc = json.loads(json.dumps(document_from_design(d), allow_nan=False))
    again = evaluate_document(doc)
    for a, b in zip(d.stages, again.stages):
        if a.achieved_macromodel is None:
            assert not a.opamps and b.achieved_macromodel is None
            continue
        assert b.achieved_macromodel["f0_hz"] == pytest.approx(a.achieved_macromodel["f0_hz"], rel=1e-12)
        assert b.opamp_requirement.gbw_required_hz == pytest.approx(a.opamp_requirement.gbw_required_hz, rel=1e-12)
    assert [w.code for w in again.warnings] == [w.code for w in d.warnings]
    assert any(row["part_id"] == "OA-7" for row in again.bom)
