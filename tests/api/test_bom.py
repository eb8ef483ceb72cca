"""The BOM people order from: rolled-up lines in JSON and CSV; CSV cells a spreadsheet cannot run."""

from __future__ import annotations

import copy
import csv
import io

import pytest

from service.api.views.designs import EXAMPLE
from service.units import parse_quantity
from tests.conftest import problem

BUTTER6 = {"response": "lowpass", "family": "butterworth", "order": 6, "cutoff_hz": "1kHz",
           "topology": "sallen_key", "strategy": "equal_component",
           "parts": {"resistors": {"series": "E24"}, "capacitors": {"series": "E6", "range": ["10n", "10n"]}},
           "opamp": {"gbw_hz": "10MHz", "slew_v_per_us": 13, "part_id": "PM7-U-OPA-GP"}}


@pytest.fixture(scope="module")
def demo():
    from service import create_app

    return create_app({"TESTING": True}).test_client().post("/v1/designs", json=EXAMPLE).get_json()


def _refs(doc) -> list[str]:
    return [c["ref"] for st in doc["stages"] for c in st["components"]] + \
        [u["ref"] for st in doc["stages"] for u in st["opamps"]]


def test_lines_roll_up_every_part_once(demo):
    refs = _refs(demo)
    lines = demo["bom_lines"]
    assert sum(line["quantity"] for line in lines) == len(refs)
    assert sorted(r for line in lines for r in line["refs"]) == sorted(refs)
    assert all(line["quantity"] == len(line["refs"]) for line in lines)
    keys = [(ln["kind"], ln["value"], ln["tolerance"], ln["dielectric"], ln["part_id"], ln["gbw_hz"])
            for ln in lines]
    assert len(keys) == len(set(keys))                   # one line per distinct part
    per_ref = {row["ref"]: row for row in demo["bom"]}
    for line in lines:
        for ref in line["refs"]:
            row = per_ref[ref]
            assert (row["kind"], row["value"], row["tolerance"], row["part_id"]) == \
                (line["kind"], line["value"], line["tolerance"], line["part_id"])


def test_lines_sorted_by_kind_then_value(demo):
    lines = demo["bom_lines"]
    order = {"capacitor": 0, "resistor": 1, "opamp": 2}
    keys = [(order[ln["kind"]], ln["value"] if ln["value"] is not None else 0.0) for ln in lines]
    assert keys == sorted(keys)
    for line in lines:
        numbers = [int("".join(ch for ch in r if ch.isdigit())) for r in line["refs"]]
        assert numbers == sorted(numbers)                # R2 before R10


def test_values_in_engineering_notation_read_back(demo):
    for line in demo["bom_lines"]:
        if line["value"] is None:
            assert line["kind"] == "opamp" and line["unit"] is None
            continue
        assert line["unit"] == ("ohm" if line["kind"] == "resistor" else "F")
        assert parse_quantity(line["value_text"]) == pytest.approx(line["value"], rel=1e-12)
        assert "e" not in line["value_text"]


def test_opamp_line_carries_gbw_and_slew(client):
    doc = client.post("/v1/designs", json=BUTTER6).get_json()
    ops = [ln for ln in doc["bom_lines"] if ln["kind"] == "opamp"]
    assert len(ops) == 1 and ops[0]["quantity"] == 3 and ops[0]["refs"] == ["U1", "U2", "U3"]
    assert ops[0]["gbw_hz"] == 10e6 and ops[0]["slew_v_per_us"] == 13 and ops[0]["part_id"] == "PM7-U-OPA-GP"
    caps = [ln for ln in doc["bom_lines"] if ln["kind"] == "capacitor"]
    assert len(caps) == 1 and caps[0]["quantity"] == 6 and caps[0]["value_text"] == "10n"


def test_bom_csv_is_the_same_lines(client, demo):
    r = client.post("/v1/designs.csv", json=EXAMPLE)
    assert r.status_code == 200 and r.mimetype == "text/csv"
    assert r.headers["Content-Disposition"] == 'attachment; filename="bom-lowpass-elliptic-6.csv"' or \
        r.headers["Content-Disposition"].startswith('attachment; filename="bom-lowpass-elliptic-')
    rows = list(csv.DictReader(io.StringIO(r.get_data(as_text=True))))
    assert len(rows) == len(demo["bom_lines"])
    for row, line in zip(rows, demo["bom_lines"]):
        assert row["refs"].split() == line["refs"] and int(row["quantity"]) == line["quantity"]
        assert row["value_text"] == (line["value_text"] or "")
        if line["value"] is not None:
            assert float(row["value"]) == line["value"]      # exact


def test_evaluate_reads_documents_with_the_per_ref_bom_and_the_lines(client, demo):
    again = client.post("/v1/designs/evaluate", json=demo).get_json()
    assert again["bom_lines"] == demo["bom_lines"]
    old = copy.deepcopy(demo)
    del old["bom_lines"]                                 # a document from before the lines existed
    assert client.post("/v1/designs/evaluate", json=old).get_json()["bom_lines"] == demo["bom_lines"]


HOSTILE = ["=HYPERLINK(\"http://example.invalid\",\"x\")", "+1+2", "-2+3", "@SUM(A1:A2)", "\tTAB", "\rCR",
           "  =1+1"]


@pytest.mark.parametrize("part_id", HOSTILE)
def test_csv_cells_are_never_formulas(client, part_id):
    # source: OWASP, "CSV Injection": cells beginning with = + - @ tab or carriage return are prefixed with '
    body = copy.deepcopy(EXAMPLE)
    for entry in body["parts"]["stock"]:
        entry["part_id"] = part_id
    r = client.post("/v1/designs.csv", json=body)
    assert r.status_code == 200, r.get_data(as_text=True)
    rows = list(csv.DictReader(io.StringIO(r.get_data(as_text=True))))
    cells = [row["part_id"] for row in rows if row["kind"] == "capacitor"]
    assert cells and all(c == "'" + part_id for c in cells)
    doc = client.post("/v1/designs", json=body).get_json()      # JSON keeps the id as given
    assert {ln["part_id"] for ln in doc["bom_lines"] if ln["kind"] == "capacitor"} == {part_id}


def test_csv_numbers_stay_numbers(client):
    text = client.get("/v1/responses.csv?response=lowpass&family=butterworth&order=2&cutoff_hz=1k").get_data(
        as_text=True)
    rows = list(csv.reader(io.StringIO(text)))
    negative = [cell for row in rows[1:] for cell in row if cell.startswith("-")]
    assert negative and all(float(cell) < 0 for cell in negative)    # -3.01 is a number, not neutralized


def test_a_part_id_cannot_smuggle_a_line_into_the_csv(client):
    body = copy.deepcopy(EXAMPLE)
    body["parts"]["stock"][0]["part_id"] = "A\r\nB,C"
    r = client.post("/v1/designs.csv", json=body)
    if r.status_code == 422:
        problem(r, 422)
        return
    rows = list(csv.reader(io.StringIO(r.get_data(as_text=True))))
    assert all(len(row) == len(rows[0]) for row in rows)
