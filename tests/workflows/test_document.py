"""The design document: round trip, edits, and strict reading (service.workflows.document)."""

from __future__ import annotations

import copy
import json

import numpy as np
import pytest

from service.approximation import design_by_order, design_by_requirement
from service.circuit import ac_response
from service.config import Settings
from service.errors import RolloffError
from service.realization import RealizationError, cascade_circuit, design_filter
from service.realization.errors import UnknownTopology
from service.workflows import DesignDocument, DocumentError, Requirement, evaluate_json, outcome_of

REQUIREMENT = Requirement(response="lowpass", family="elliptic", passband_hz=1000.0, stopband_hz=1600.0,
                          passband_ripple_db=0.5, stopband_attenuation_db=40.0)


def evaluate_document(doc):
    """The realized design of a document, as /v1/tolerance and /v1/responses read one (fields under design.)."""
    return evaluate_json(doc, Settings(), path="design").design


@pytest.fixture(scope="module")
def outcome():
    approx = design_by_requirement("lowpass", "elliptic", 1000.0, 1600.0, 0.5, 40.0)
    return outcome_of(design_filter(approx), REQUIREMENT)


@pytest.fixture(scope="module")
def design(outcome):
    return outcome.design


@pytest.fixture()
def doc(outcome):
    return copy.deepcopy(outcome.as_dict())


def test_document_is_plain_json_with_public_fields(doc):
    text = json.dumps(doc, allow_nan=False)
    back = json.loads(text)
    for key in ("response", "family", "order", "stages", "requirement", "bom", "netlist", "summary", "verdict",
                "warnings"):
        assert key in back
    st = back["stages"][0]
    for key in ("number", "section", "topology", "strategy", "components", "opamps", "achieved", "peak_gain_db",
                "peak_frequency_hz", "opamp_requirement"):
        assert key in st
    for c in st["components"]:
        assert {"ref", "kind", "value", "ideal", "tolerance", "part_id"} <= set(c)
        if c["kind"] == "capacitor":
            assert "dielectric" in c
    for row in back["bom"]:
        assert set(row) == {"ref", "kind", "value", "tolerance", "dielectric", "part_id"}
    assert "VIN in 0 AC 1" in back["netlist"]
    assert set(back["summary"]) == {"edges", "meets", "status", "worst_margin_db"}
    assert [st["number"] for st in back["stages"]] == list(range(1, len(back["stages"]) + 1))


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


def test_evaluate_reproduces_achieved(outcome, design, doc):
    again_outcome = evaluate_json(doc, Settings())
    again = again_outcome.design
    for a, b in zip(design.stages, again.stages):
        for key in ("f0_hz", "q", "gain", "fz_hz"):
            if a.achieved[key] is None:
                assert b.achieved[key] is None
            else:
                assert b.achieved[key] == pytest.approx(a.achieved[key], rel=1e-12)
        assert b.peak_gain_db == pytest.approx(a.peak_gain_db, abs=1e-9)
    assert again_outcome.summary()["meets"] == outcome.summary()["meets"]
    for ra, rb in zip(outcome.summary()["edges"], again_outcome.summary()["edges"]):
        assert rb["loss_db"] == pytest.approx(ra["loss_db"], abs=1e-9)
    assert again_outcome.as_dict()["verdict"] == outcome.as_dict()["verdict"]
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
    with pytest.raises(DocumentError) as e:
        evaluate_document(doc)
    assert e.value.field == "design.stages[1].components"
    assert removed["role"] in e.value.message


def test_repeated_ref_is_an_error(doc):
    doc["stages"][1]["components"][0]["ref"] = doc["stages"][0]["components"][0]["ref"]
    with pytest.raises(DocumentError) as e:
        evaluate_document(doc)
    assert e.value.field == "design.stages[1].components[0].ref"
    assert "repeats" in e.value.message


def test_wrong_kind_is_an_error(doc):
    comp = next(c for c in doc["stages"][1]["components"] if c["kind"] == "resistor")
    comp["kind"] = "capacitor"
    comp["value"] = 1e-9
    with pytest.raises(DocumentError) as e:
        evaluate_document(doc)
    assert e.value.field.endswith(".kind")
    assert "needs a resistor" in e.value.message


def test_unknown_kind_and_topology(doc):
    d1 = copy.deepcopy(doc)
    d1["stages"][0]["components"][0]["kind"] = "inductor"
    with pytest.raises(DocumentError) as e:
        evaluate_document(d1)
    assert e.value.field == "design.stages[0].components[0].kind"
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


def test_cascade_circuit_of_a_read_document_matches_the_design(design, doc):
    f = np.array([100.0, 1000.0, 1500.0])
    a = ac_response(cascade_circuit(design.plans), f)
    b = ac_response(cascade_circuit(DesignDocument.from_json(doc).plans(), ideal=True), f)
    np.testing.assert_allclose(a, b, rtol=1e-9)


def test_unknown_keys_anywhere_are_named(doc):
    for path, where in ((("stopband_hzz",), "requirement"), (("gbw_errror",), "settings"),
                        (("stages", 0, "colour"), None), (("stages", 1, "components", 0, "value_ohm"), None)):
        d = copy.deepcopy(doc)
        node = d
        for key in path[:-1]:
            node = node[key]
        (node if where is None else node[where])[path[-1]] = 1
        with pytest.raises(RolloffError) as e:
            DesignDocument.from_json(d, "design")
        assert e.value.field.endswith(path[-1]), e.value.field
        assert e.value.field.startswith("design.")


def test_an_edited_requirement_is_verified_as_edited(doc):
    strict = copy.deepcopy(doc)
    strict["requirement"]["passband_ripple_db"] = 0.01
    assert evaluate_json(strict, Settings()).verdict.verdict.status == "misses"
    lenient = copy.deepcopy(doc)
    lenient["requirement"]["stopband_attenuation_db"] = 10.0
    lenient["requirement"]["passband_ripple_db"] = 1.0
    assert evaluate_json(lenient, Settings()).verdict.meets
    reversed_ = copy.deepcopy(doc)
    reversed_["requirement"]["stopband_hz"] = 500.0
    with pytest.raises(Exception) as e:
        DesignDocument.from_json(reversed_, "design")
    assert e.value.field == "design.requirement.stopband_hz"


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
    doc = json.loads(json.dumps(outcome_of(d).as_dict(), allow_nan=False))
    again = evaluate_document(doc)
    for a, b in zip(d.stages, again.stages):
        if a.achieved_macromodel is None:
            assert not a.opamps and b.achieved_macromodel is None
            continue
        assert b.achieved_macromodel["f0_hz"] == pytest.approx(a.achieved_macromodel["f0_hz"], rel=1e-12)
        assert b.opamp_requirement.gbw_required_hz == pytest.approx(a.opamp_requirement.gbw_required_hz, rel=1e-12)
    assert [w.code for w in again.warnings] == [w.code for w in d.warnings]
    assert any(row["part_id"] == "OA-7" for row in again.bom)
