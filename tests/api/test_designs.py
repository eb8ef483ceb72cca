"""/v1/designs and /v1/designs/evaluate through the test client."""

from __future__ import annotations

import copy
import csv
import io

import numpy as np
import pytest

from service.api.views.designs import EVALUATE_EXAMPLE, EXAMPLE
from tests.conftest import problem
from tests.ngspice import run_ngspice_ac

URL = "/v1/designs"
BUTTER4 = {"response": "lowpass", "family": "butterworth", "order": 4, "cutoff_hz": "1kHz",
           "parts": {"resistors": {"series": "E96"}, "capacitors": {"series": "E12"}}}


@pytest.fixture(scope="module")
def butter4():
    from service import create_app

    return create_app({"TESTING": True}).test_client().post(URL, json=BUTTER4).get_json()


def test_design_document_fields(butter4):
    assert butter4["order"] == 4 and len(butter4["stages"]) == 2
    refs = [c["ref"] for st in butter4["stages"] for c in st["components"]]
    refs += [u["ref"] for st in butter4["stages"] for u in st["opamps"]]
    assert len(refs) == len(set(refs))                      # refs unique across the design
    assert {line["ref"] for line in butter4["bom"]} == set(refs)
    assert "VIN in 0 AC 1" in butter4["netlist"]
    for st in butter4["stages"]:
        assert {"f0_hz", "q", "f0_error", "q_error"} <= set(st["achieved"])
        for c in st["components"]:
            assert c["ideal"] is not None and c["value"] > 0


def test_butterworth_4th_order_within_2_percent_in_ngspice(butter4):
    # source: ngspice AC analysis (reference simulator) of the returned netlist
    f, v = run_ngspice_ac(butter4["netlist"].replace(".ac dec", ".ac dec"))
    mag_db = 20 * np.log10(np.abs(v["out"]))
    f3 = np.interp(-3.0103, mag_db[::-1], f[::-1])
    assert abs(f3 / 1000.0 - 1) < 0.02


def test_stock_part_ids_come_back(client):
    body = client.post(URL, json=EXAMPLE).get_json()
    ids = {line["part_id"] for line in body["bom"]}
    assert "PM7-U-OPA-GP" in ids
    caps = [line for line in body["bom"] if line["kind"] == "capacitor"]
    assert caps and all(line["dielectric"] for line in caps)


def test_bom_csv_and_spice_formats(client):
    r = client.post(URL, json=dict(BUTTER4, format="csv"))
    rows = list(csv.DictReader(io.StringIO(r.get_data(as_text=True))))
    assert r.mimetype == "text/csv" and {row["kind"] for row in rows} == {"resistor", "capacitor", "opamp"}
    r = client.post(URL, json=dict(BUTTER4, format="spice"))
    assert r.mimetype == "text/x.spice-netlist" and r.get_data(as_text=True).rstrip().endswith(".end")


def test_evaluate_round_trip_and_edit(client, butter4):
    again = client.post(URL + "/evaluate", json=butter4).get_json()
    for a, b in zip(again["stages"], butter4["stages"]):
        assert a["achieved"]["f0_hz"] == pytest.approx(b["achieved"]["f0_hz"], rel=1e-12)
    edited = copy.deepcopy(butter4)
    cap = next(c for c in edited["stages"][0]["components"] if c["kind"] == "capacitor")
    cap["value"] = cap["value"] * 1.2
    changed = client.post(URL + "/evaluate", json=edited).get_json()
    assert changed["stages"][0]["achieved"]["f0_hz"] < butter4["stages"][0]["achieved"]["f0_hz"]


def test_evaluate_accepts_si_strings(client):
    body = client.post(URL + "/evaluate", json=EVALUATE_EXAMPLE).get_json()
    # C1 = 22n, C2 = 10n, R1 = R2 = 10.7k: f0 = 1/(2 pi R sqrt(C1 C2)) (common practice, Sallen-Key)
    f0 = 1 / (2 * np.pi * 10.7e3 * np.sqrt(22e-9 * 10e-9))
    assert body["stages"][0]["achieved"]["f0_hz"] == pytest.approx(f0, rel=5e-6)   # figures: 6 significant digits


def test_evaluate_errors_name_the_part(client, butter4):
    missing = copy.deepcopy(butter4)
    missing["stages"][0]["components"].pop()
    assert "stages[0].components" in problem(client.post(URL + "/evaluate", json=missing), 422)["errors"]
    repeated = copy.deepcopy(butter4)
    repeated["stages"][1]["components"][0]["ref"] = repeated["stages"][0]["components"][0]["ref"]
    errors = problem(client.post(URL + "/evaluate", json=repeated), 422)["errors"]
    assert "stages[1].components[0].ref" in errors


@pytest.mark.parametrize("change, field", [
    ({"topology": "sallen_key", "family": "elliptic", "passband_ripple_db": 0.5, "stopband_attenuation_db": 40},
     "topology"),
    ({"topology": "no_such"}, "topology"),
    ({"topology": ["sallen_key"]}, "topology"),
    ({"parts": {"resistors": {"series": "E7"}}}, "parts.resistors.series"),
    ({"parts": {"inductors": {}}}, "parts.inductors"),
    ({"parts": {"capacitors": {"series": "E3", "range": ["5n", "6n"]}}}, "parts.capacitors"),
    ({"parts": {"resistors": {"range": ["1M", "1k"]}}}, "parts.resistors.range"),
    ({"opamp": {"slew_v_per_us": 5}}, "opamp.gbw_hz"),
])
def test_bad_design_requests_name_the_field(client, change, field):
    body = problem(client.post(URL, json=dict(BUTTER4, **change)), 422)
    assert any(k.startswith(field) for k in body["errors"]), body


def test_requirement_designs_keep_a_margin_for_part_errors(client):
    req = {"response": "bandpass", "family": "butterworth", "passband_hz": ["35kHz", "45kHz"],
           "stopband_hz": ["25kHz", "60kHz"], "passband_ripple_db": 1, "stopband_attenuation_db": 30}
    body = client.post(URL, json=req).get_json()
    assert body["summary"]["meets"] is True, body["summary"]
    assert all(e["required_db"] in (1, 30) for e in body["summary"]["edges"])  # checked as asked
    minimum = client.post(URL, json=dict(req, passband_margin_db=0, stopband_margin_db=0)).get_json()
    approx = client.post("/v1/approximations", json=req).get_json()
    assert minimum["order"] == approx["order"]


def test_demo_design_meets_its_requirement(client):
    body = client.post(URL, json=EXAMPLE).get_json()
    assert body["summary"]["meets"] is True
    assert {line["part_id"] for line in body["bom"] if line["kind"] == "capacitor"} <= {
        f"PM7-C0G-{v.upper()}" for v in ("1n", "1.5n", "2.2n", "3.3n", "4.7n", "6.8n", "10n", "15n", "22n", "33n",
                                           "47n")}
