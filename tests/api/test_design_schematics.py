"""Schematics through /v1/designs and /v1/designs/evaluate: format=svg, Accept, stage=N."""

from __future__ import annotations

import copy

import pytest

from service.api.views.designs import EVALUATE_EXAMPLE
from service.realization import cascade_circuit
from service.workflows import DesignDocument
from tests.circuit.test_schematic import check_drawing, read_schematic
from tests.conftest import problem

BUTTER5 = {"response": "lowpass", "family": "butterworth", "order": 5, "cutoff_hz": "2kHz",
           "parts": {"resistors": {"series": "E96"}, "capacitors": {"series": "E12"}}}


@pytest.fixture(scope="module")
def client():
    from service import create_app

    return create_app({"TESTING": True}).test_client()


@pytest.fixture(scope="module")
def butter5(client):
    return client.post("/v1/designs", json=BUTTER5).get_json()


def _refs(stage: dict) -> list[str]:
    return [c["ref"] for c in stage["components"]] + [u["ref"] for u in stage["opamps"]]


def test_whole_filter_schematic_matches_the_design_netlist(client, butter5):
    # source: the design's own circuit (cascade_circuit of its stages), read back from the drawing
    r = client.post("/v1/designs", json={**BUTTER5, "format": "svg"})
    assert r.status_code == 200 and r.mimetype == "image/svg+xml"
    circuit = cascade_circuit(DesignDocument.from_json(butter5).plans(), ideal=True)
    refs = [ref for st in butter5["stages"] for ref in _refs(st)]
    d = check_drawing(r.get_data(as_text=True), circuit, refs, {"in": True, "out1": False, "out2": False,
                                                                  "out": True})
    assert sorted(d.frames) == [1, 2, 3]


def test_one_stage_by_number_from_one(client, butter5):
    circuit = cascade_circuit(DesignDocument.from_json(butter5).plans(), ideal=True)
    for n, st in enumerate(butter5["stages"], start=1):
        r = client.post("/v1/designs/evaluate?format=svg&stage=%d" % n, json=butter5)
        assert r.status_code == 200 and r.mimetype == "image/svg+xml"
        nodes = {"in" if n == 1 else f"out{n - 1}": True, "out" if n == 3 else f"out{n}": True}
        d = check_drawing(r.get_data(as_text=True), circuit, _refs(st), nodes)
        assert list(d.frames) == [n]
        assert d.frames[n].startswith(f"Stage {n} · {st['section']['kind']}")
    r = client.post("/v1/designs", json={**BUTTER5, "format": "svg", "stage": 2})
    assert r.status_code == 200
    assert set(read_schematic(r.get_data(as_text=True)).parts) == {c["ref"] for c in butter5["stages"][1]["components"]}


def test_accept_header_selects_the_schematic(client):
    r = client.post("/v1/designs/evaluate", json=EVALUATE_EXAMPLE, headers={"Accept": "image/svg+xml"})
    assert r.status_code == 200 and r.mimetype == "image/svg+xml"
    assert set(read_schematic(r.get_data(as_text=True)).parts) == {"C1", "C2", "R1", "R2"}
    r = client.post("/v1/designs/evaluate", json=EVALUATE_EXAMPLE,
                    headers={"Accept": "application/json;q=0.9, image/svg+xml;q=0.5"})
    assert r.mimetype == "application/json"
    r = client.post("/v1/designs/evaluate", json=EVALUATE_EXAMPLE, headers={"Accept": "*/*"})
    assert r.mimetype == "application/json"


def test_bad_stage_is_a_problem_naming_it(client, butter5):
    body = problem(client.post("/v1/designs/evaluate?format=svg&stage=4", json=butter5), 422)
    assert "stage" in str(body) and "numbered from 1" in body["detail"]
    body = problem(client.post("/v1/designs/evaluate?format=svg&stage=0", json=butter5), 422)
    assert "stage" in body["errors"]
    body = problem(client.post("/v1/designs/evaluate?stage=1", json=butter5), 422)
    assert "stage" in str(body) and "format svg" in body["detail"]
    broken = copy.deepcopy(butter5)
    del broken["stages"][1]["components"][0]
    body = problem(client.post("/v1/designs/evaluate?format=svg", json=broken), 422)
    assert "stages[1]" in str(body)
