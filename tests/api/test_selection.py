"""The field= selector and the cell rules, on real replies: every value of a reply is reachable by its path."""

from __future__ import annotations

import pytest

from service.api.formats import cell, csv_text, neutralized, number_text
from service.api.selection import scalar, select, table
from service.errors import InvalidParameter


@pytest.fixture(scope="module")
def design():
    from service import create_app

    url = ("/v1/designs?response=bandpass&family=butterworth&passband_hz=35k,45k&stopband_hz=25k,60k"
           "&passband_ripple_db=1&stopband_attenuation_db=30")
    return create_app({"TESTING": True}).test_client().get(url).get_json()


def paths(node, prefix=""):
    """(field= path, value) of every value in a reply, lists counted from 1, parts also by ref."""
    if isinstance(node, dict):
        for k, v in node.items():
            yield from paths(v, f"{prefix}.{k}" if prefix else k)
    elif isinstance(node, list):
        for i, v in enumerate(node, start=1):
            yield from paths(v, f"{prefix}.{i}")
            if isinstance(v, dict) and "ref" in v:
                yield from paths(v, f"{prefix}.{v['ref']}")
    else:
        yield prefix, node


def test_every_value_of_a_design_is_reachable(design):
    found = list(paths(design))
    assert len(found) > 200
    for path, value in found:
        assert select(design, path) == value, path
        assert scalar(select(design, path), path) == value


def test_stage_numbers_and_list_entries_count_from_one(design):
    for st in design["stages"]:
        assert select(design, f"stages.{st['number']}") is st
    assert select(design, "bom_lines.1") == design["bom_lines"][0]
    with pytest.raises(InvalidParameter, match="numbered from 1"):
        select(design, "stages.0")


def test_keys_with_dots_are_matched_whole():
    reply = {"metrics": {"attenuation_db": {"25600.0": {"p2.5": 81.2, "p50": 82.0}}}}
    assert select(reply, "metrics.attenuation_db.25600.0.p2.5") == 81.2
    with pytest.raises(InvalidParameter, match="its fields are p2.5, p50"):
        select(reply, "metrics.attenuation_db.25600.0.p3")


def test_objects_and_lists_are_not_one_value(design):
    with pytest.raises(InvalidParameter, match="summary.meets"):
        scalar(select(design, "summary"), "summary")
    with pytest.raises(InvalidParameter, match="requirement.passband_hz.1 to requirement.passband_hz.2"):
        scalar(select(design, "requirement.passband_hz"), "requirement.passband_hz")


def test_tables_of_selections(design):
    t = table(select(design, "bom_lines"), "bom_lines")
    assert list(t)[:3] == ["kind", "quantity", "refs"] and len(t["kind"]) == len(design["bom_lines"])
    t = table(select(design, "summary"), "summary")
    assert t["meets"] == [design["summary"]["meets"]] and t["edges"] == [f"{len(design['summary']['edges'])} entries"]
    assert table(4700.0, "nearest") == {"nearest": [4700.0]}


@pytest.mark.parametrize("value, text", [
    (4700.0, "4700"), (1e-08, "1e-08"), (-0.331023, "-0.331023"), (6, "6"), (True, "true"), (False, "false"),
    (float("nan"), ""), (2.5e15, "2500000000000000.0"),
])
def test_numbers_as_a_spreadsheet_reads_them(value, text):
    assert number_text(value) == text


@pytest.mark.parametrize("text, safe", [
    ("=1+1", "'=1+1"), ("+1", "'+1"), ("-1", "'-1"), ("@A1", "'@A1"), ("\t=1", "'\t=1"), ("\r=1", "'\r=1"),
    ("  =1", "'  =1"), ("PM7-C0G-1N", "PM7-C0G-1N"), ("", ""),
])
def test_text_cells_that_would_be_formulas_are_quoted(text, safe):
    # source: OWASP, "CSV Injection" (cells beginning with = + - @ tab or carriage return)
    assert neutralized(text) == safe
    assert cell(text) == safe


def test_numbers_are_never_quoted():
    assert cell(-3.01) == "-3.01" and cell(None) == "" and cell(True) == "true"
    text = csv_text({"a": [-1.5, 2.0], "b": ["=x", None]})
    assert text == "a,b\r\n-1.5,'=x\r\n2,\r\n"
