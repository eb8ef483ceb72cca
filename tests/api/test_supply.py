"""Supplies over HTTP: the design on its rails (bias network, coupling, BOM, netlist), its operating point and
offsets in ngspice, the passband unchanged, the document reproducing it, and bad rails.

The ngspice checks run the netlist the service returns; they fail (never skip) when ngspice is missing.
"""

from __future__ import annotations

import copy
import math

import numpy as np
import pytest

from tests.conftest import problem
from tests.ngspice import run_ngspice_noise, run_ngspice_op, run_ngspice_sweeps

# PM-7 sketches on the board's single 5 V rail (invented demo numbers): the op-amp's offset, bias current, noise and
# how close its output swings to the rails.
OPAMP = {"gbw_hz": "10MHz", "vos_v": "1.5m", "ib_a": 20e-9, "en_nv_rthz": 9, "in_pa_rthz": 0.4,
         "rail_headroom_v": 0.1, "part_id": "PM7-U-OPA-RR"}
RAIL = {"v_pos": 5, "v_neg": 0}
LOWPASS = {"response": "lowpass", "family": "butterworth", "order": 4, "cutoff_hz": "1kHz", "opamp": OPAMP,
           "supply": RAIL}
HIGHPASS = {"response": "highpass", "family": "butterworth", "order": 4, "cutoff_hz": "100Hz", "opamp": OPAMP,
            "supply": RAIL}
HIGHPASS_AC = dict(HIGHPASS, supply=dict(RAIL, input_coupling="ac"))
CASES = [pytest.param(LOWPASS, "dc", id="lowpass-auto-dc"), pytest.param(HIGHPASS, "none", id="highpass-auto-none"),
         pytest.param(HIGHPASS_AC, "ac", id="highpass-ac")]
#: Each unity-gain op-amp between mid-rail and an output loses 2.5 V / a0 to its finite open-loop gain (the
#: macromodel's 100 dB): the buffer and the two stages.
GAIN_ERROR_V = 2.5 / 1e5
CHAIN_OPAMPS = 3


def _without_sweeps(netlist: str) -> str:
    """The netlist's circuit without its .ac and .noise lines (for the helpers' own analyses)."""
    return "\n".join(line for line in netlist.splitlines() if not line.startswith((".ac ", ".noise "))) + "\n"
#: Largest change of the passband response a supply's network may cause (dB).
PASSBAND_DB = 0.01


def _design(client, body):
    r = client.post("/v1/designs", json=body)
    assert r.status_code == 200, r.get_data(as_text=True)
    return r.get_json()


@pytest.mark.parametrize(("body", "coupling"), CASES)
def test_single_rail_operating_point_matches_ngspice(client, body, coupling):
    d = _design(client, body)
    s = d["supply"]
    assert d["settings"]["supply"] == {"v_pos": 5.0, "v_neg": 0.0, "mid_rail": "buffered",
                                       "input_coupling": body["supply"].get("input_coupling", "auto")}
    assert s["bias_v"] == 2.5 and s["input_coupling"] == coupling
    # the bias network (and the coupling) are parts of the BOM and of the netlist
    roles = {p["role"] for p in s["added_parts"]}
    assert {"bias_top", "bias_bottom", "bias_decoupling", "mid_rail_buffer"} <= roles
    assert ("input_coupling" in roles) == (coupling == "ac")
    bom = {line["ref"] for line in d["bom"]}
    for p in s["added_parts"]:
        assert p["ref"] in bom
        assert any(line.split()[0] in (p["ref"], "X" + p["ref"]) for line in d["netlist"].splitlines())
    assert "VPOS vpos 0 DC 5" in d["netlist"]
    # source: ngspice operating point (reference simulator), the returned netlist unchanged
    op = run_ngspice_op(_without_sweeps(d["netlist"]), [b["node"] for b in s["opamp_bias"]])
    for b in s["opamp_bias"]:
        assert op[b["node"]] == pytest.approx(b["dc_v"], abs=1e-6)
        # mid-rail plus the computed offset
        assert op[b["node"]] == pytest.approx(2.5 + b["offset_v"], abs=CHAIN_OPAMPS * GAIN_ERROR_V)
        assert b["within"] is True and b["low_v"] == pytest.approx(0.1) and b["high_v"] == pytest.approx(4.9)
        assert abs(b["offset_v"]) < 0.05
    out = next(b for b in s["opamp_bias"] if b["node"] == "out")
    assert s["output_offset_v"] == pytest.approx(out["offset_v"], abs=1e-12)
    assert [(o["stage"], o["node"]) for o in s["stage_offsets"]] == [(1, "out1"), (2, "out")]
    assert s["stage_offsets"][-1]["offset_v"] == pytest.approx(s["output_offset_v"], abs=1e-12)


@pytest.mark.parametrize(("body", "coupling"), CASES)
def test_single_rail_passband_unchanged_in_ngspice(client, body, coupling):
    d = _design(client, body)
    assert d["supply"]["ac_change_db"] < PASSBAND_DB
    # source: ngspice AC analysis (reference simulator) of the netlist on the rail, against the service's response of
    # the circuit as designed (ground-referenced)
    sweep = next(line for line in d["netlist"].splitlines() if line.startswith(".ac "))[4:]
    [(f, v)] = run_ngspice_sweeps(_without_sweeps(d["netlist"]), [sweep])
    resp = client.post("/v1/responses", json={"design": d, "frequencies": f.tolist()}).get_json()
    ours = np.array(resp["magnitude_db"])
    theirs = 20 * np.log10(np.abs(v))
    band = ours >= ours.max() - 3.0
    assert band.sum() > 50
    assert np.max(np.abs(theirs[band] - ours[band])) < PASSBAND_DB


def test_document_reproduces_the_supply(client):
    d = _design(client, LOWPASS)
    again = client.post("/v1/designs/evaluate", json=copy.deepcopy(d)).get_json()
    for key in ("supply", "noise", "bom", "netlist", "settings", "warnings"):
        assert again[key] == d[key], key
    # /v1/responses on the returned document analyses the same circuit: the same operating point and noise
    body = {"design": d, "frequencies": {"start_hz": 10, "stop_hz": 100e3, "points": 101},
            "noise": {"band_hz": [10, 100e3], "points_per_decade": 200}, "headroom": {"input_peak_v": 0.5}}
    resp = client.post("/v1/responses", json=body).get_json()
    dc = {b["ref"]: b["dc_v"] for b in d["supply"]["opamp_bias"]}
    assert {o["ref"]: o["dc_v"] for o in resp["headroom"]["opamps"]} == pytest.approx(dc, abs=1e-12)
    assert resp["noise"]["output_rms_v"] == pytest.approx(d["noise"]["output_rms_v"], rel=1e-9)
    # the bias network's noise is counted, outside the stages
    assert any(p["stage"] is None for p in resp["noise"]["parts"])
    # source: ngspice noise analysis (reference simulator) of the design's own netlist (.noise over its sweep)
    ref = run_ngspice_noise(d["netlist"])
    assert abs(20 * math.log10(d["noise"]["output_rms_v"] / ref["onoise_total"])) < 0.1


def test_split_rails_keep_the_circuit(client):
    d = _design(client, dict(LOWPASS, supply={"v_pos": 12, "v_neg": -12}))
    s = d["supply"]
    assert s["added_parts"] == [] and s["bias_v"] == 0.0 and s["input_coupling"] == "none"
    assert s["ac_change_db"] is None and s["caution"] is None
    # source: ngspice operating point (reference simulator): the offsets alone move the outputs
    op = run_ngspice_op(_without_sweeps(d["netlist"]), [b["node"] for b in s["opamp_bias"]])
    for b in s["opamp_bias"]:
        assert op[b["node"]] == pytest.approx(b["dc_v"], abs=1e-6)
        assert b["dc_v"] == pytest.approx(b["offset_v"], abs=1e-12)
        assert (b["low_v"], b["high_v"]) == pytest.approx((-11.9, 11.9))


def test_high_voltage_supply_carries_the_caution(client):
    d = _design(client, dict(LOWPASS, supply={"v_pos": 40, "v_neg": -40}))
    assert "licensed" in d["supply"]["caution"] and "codes" in d["supply"]["caution"]
    assert any(w["code"] == "high_voltage" for w in d["warnings"])


def test_a_stage_that_clips_on_the_rail_is_named(client):
    # a 4th-order Chebyshev with its high-Q section first, 1 V peak out of a 3.3 V rail
    d = _design(client, {"response": "lowpass", "family": "chebyshev1", "order": 4, "cutoff_hz": "1kHz",
                         "passband_ripple_db": 3, "section_order": "descending_q", "topology": "sallen_key",
                         "opamp": dict(OPAMP, rail_headroom_v=0.2), "supply": {"v_pos": 3.3},
                         "output_amplitude_v": 1.0})
    codes = {w["code"]: w for w in d["warnings"]}
    assert "stage_clips" in codes and "clips_before_output" in codes
    w = codes["clips_before_output"]
    assert w["stage"] == 1 and "stage 1" in w["message"] and " Hz " in w["message"] and "limit of" in w["message"]


@pytest.mark.parametrize(("supply", "field"), [
    ({"v_pos": 0, "v_neg": 5}, "supply.v_pos"),          # reversed
    ({"v_pos": -5, "v_neg": 5}, "supply.v_pos"),         # reversed
    ({"v_pos": 5, "v_neg": 5}, "supply.v_pos"),          # zero span
    ({"v_pos": 5, "v_neg": 1}, "supply.v_neg"),          # ground outside the rails
    ({"v_pos": -1, "v_neg": -5}, "supply.v_pos"),
    ({"v_pos": 500}, "supply.v_pos"),
    ({"v_pos": "5kV"}, "supply.v_pos"),
    ({"v_neg": -5}, "supply.v_pos"),
    ({"v_pos": 5, "mid_rail": "zener"}, "supply.mid_rail"),
    ({"v_pos": 5, "input_coupling": "transformer"}, "supply.input_coupling"),
    ({"v_pos": 5, "ground": 0}, "supply.ground"),
])
def test_bad_supplies_name_the_field(client, supply, field):
    p = problem(client.post("/v1/designs", json=dict(LOWPASS, supply=supply)), 422)
    assert field in p["errors"], p


def test_bad_supply_in_a_document_names_the_field(client):
    d = _design(client, LOWPASS)
    doc = copy.deepcopy(d)
    doc["settings"]["supply"] = {"v_pos": 3.3, "v_neg": 3.3}
    p = problem(client.post("/v1/designs/evaluate", json=doc), 422)
    assert "settings.supply.v_pos" in p["errors"]
    p = problem(client.post("/v1/responses", json={"design": doc, "noise": {}}), 422)
    assert "design.settings.supply.v_pos" in p["errors"]


def test_rail_headroom_leaving_no_range(client):
    p = problem(client.post("/v1/designs", json=dict(LOWPASS, opamp=dict(OPAMP, rail_headroom_v=3.0))), 422)
    assert "opamp.rail_headroom_v" in p["errors"]


@pytest.mark.parametrize(("headroom", "field"), [
    ({"input_peak_v": 2.6}, "headroom.input_peak_v"),       # 2.5 V +- 2.6 V leaves a 0-5 V rail
    ({"output_peak_v": 3.0}, "headroom.output_peak_v"),     # the input for 3 V out (gain 1) leaves it too
    ({"input_peak_v": 0.1, "output_peak_v": 0.1}, "headroom.input_peak_v"),
    ({}, "headroom.input_peak_v"),
    ({"input_peak_v": -1}, "headroom.input_peak_v"),
    ({"input_peak_v": 0}, "headroom.input_peak_v"),
    ({"output_peak_v": "1MV"}, "headroom.output_peak_v"),
])
def test_levels_beyond_the_rails_name_the_field(client, headroom, field):
    d = _design(client, LOWPASS)
    p = problem(client.post("/v1/responses", json={"design": d, "headroom": headroom}), 422)
    assert field in p["errors"], p
