"""Headroom over HTTP: every op-amp output's level against its range, the stage that clips before the output,
checked in an ngspice transient of the returned netlist; levels on a single rail.

The ngspice checks fail (never skip) when ngspice is missing.
"""

from __future__ import annotations

import math
import re

import numpy as np
import pytest

from tests.ngspice import run_ngspice_tran_raw

SWING = 1.0
# A 4th-order Chebyshev lowpass (3 dB ripple) with its high-Q section first: stage 1 peaks well above the output
# (PM-7 sketch, invented demo numbers).
DESIGN = {"response": "lowpass", "family": "chebyshev1", "order": 4, "cutoff_hz": "1kHz", "passband_ripple_db": 3,
          "section_order": "descending_q", "topology": "sallen_key",
          "opamp": {"gbw_hz": "10MHz", "output_swing_v": SWING}}
GRID = {"start_hz": 10, "stop_hz": 100e3, "points": 301}


@pytest.fixture(scope="module")
def document():
    from service import create_app

    r = create_app({"TESTING": True}).test_client().post("/v1/designs", json=DESIGN)
    assert r.status_code == 200, r.get_data(as_text=True)
    return r.get_json()


def _headroom(client, doc, **level):
    r = client.post("/v1/responses", json={"design": doc, "frequencies": GRID, "headroom": level})
    assert r.status_code == 200, r.get_data(as_text=True)
    return r.get_json()


def test_levels_follow_the_stage_peak_gains(client, document):
    body = _headroom(client, document, input_peak_v=0.1)
    h = body["headroom"]
    by_stage = {o["stage"]: o for o in h["opamps"]}
    q = document["stages"][0]["achieved"]["q"]
    # common practice (no source): a second-order lowpass of Q > 1/sqrt(2) peaks at Q / sqrt(1 - 1/(4 Q^2))
    assert by_stage[1]["peak_gain"] == pytest.approx(q / math.sqrt(1 - 1 / (4 * q * q)), rel=3e-3)
    for k in (1, 2):
        assert by_stage[k]["peak_gain"] == pytest.approx(10 ** (document["stages"][k - 1]["peak_gain_db"] / 20),
                                                         rel=1e-6)
        assert by_stage[k]["peak_v"] == pytest.approx(0.1 * by_stage[k]["peak_gain"])
        assert len(by_stage[k]["level_v"]) == GRID["points"]
        assert max(by_stage[k]["level_v"]) <= by_stage[k]["peak_v"] * (1 + 1e-12)
        assert (by_stage[k]["low_v"], by_stage[k]["high_v"], by_stage[k]["limit_v"]) == (-SWING, SWING, SWING)
    # the output's level is the response's magnitude times the input
    mag = 10 ** (np.array(body["magnitude_db"]) / 20)
    np.testing.assert_allclose(by_stage[2]["level_v"], 0.1 * mag, rtol=1e-9)
    assert h["first_clip"] == {"ref": by_stage[1]["ref"], "stage": 1} and h["clips_before_output"]
    assert h["clip_input_v"] == pytest.approx(SWING / by_stage[1]["peak_gain"], rel=1e-9)
    assert h["max_output_v"] == pytest.approx(h["clip_input_v"] * h["output_peak_gain"], rel=1e-12)
    # the warning names the stage, the level, the limit and the frequency
    [w] = [w for w in h["warnings"] if w["code"] == "clips_before_output"]
    assert w["stage"] == 1 and w["message"].startswith("stage 1 clips before the output")
    assert f"{by_stage[1]['peak_frequency_hz']:.4g} Hz" in w["message"] and f"limit of {SWING:.4g} V" in w["message"]
    assert f"{by_stage[1]['peak_v']:.4g} V peak" in w["message"]
    assert not [w for w in h["warnings"] if w["code"] == "stage_clips"]     # 0.1 V in: nothing clips yet
    # from the output level instead
    h2 = _headroom(client, document, output_peak_v=0.5)["headroom"]
    assert h2["input_peak_v"] == pytest.approx(0.5 / h["output_peak_gain"], rel=1e-12)
    clipped = _headroom(client, document, input_peak_v=0.5)["headroom"]
    assert [(w["code"], w["stage"]) for w in clipped["warnings"]][0] == ("stage_clips", 1)


def _clipping_netlist(netlist: str, amplitude: float, f_hz: float) -> str:
    """The returned netlist with op-amps whose outputs clip at +/- SWING and a sine input."""
    text = netlist.replace("E1 out 0 p 0 1", f"B1 out 0 V = max(min(V(p), {SWING!r}), {-SWING!r})")
    assert "B1 out 0" in text
    return re.sub(r"^VIN in 0 AC 1$", f"VIN in 0 SIN(0 {amplitude!r} {f_hz!r})", text, flags=re.M)


@pytest.mark.parametrize("factor", [0.99, 1.01])
def test_the_named_stage_clips_in_a_transient_at_the_predicted_input(client, document, factor):
    h = _headroom(client, document, input_peak_v=0.1)["headroom"]
    first = next(o for o in h["opamps"] if o["ref"] == h["first_clip"]["ref"])
    f = first["peak_frequency_hz"]
    net = _clipping_netlist(document["netlist"], factor * h["clip_input_v"], f)
    period = 1 / f
    # source: ngspice transient analysis (reference simulator), steady state after 40 periods
    _, v = run_ngspice_tran_raw(net, period / 400, 45 * period, nodes=(first["node"], "out"), tstart=40 * period)
    peak = np.max(np.abs(v[first["node"]]))
    if factor < 1:
        assert peak == pytest.approx(factor * SWING, rel=2e-3)          # linear, just below its swing
        assert peak < SWING * 0.995
    else:
        assert peak == pytest.approx(SWING, abs=1e-6)                    # held at the swing: clipped
        assert np.mean(np.abs(v[first["node"]]) > SWING * (1 - 1e-6)) > 0.02
    assert np.max(np.abs(v["out"])) < SWING                              # the output never reaches its own


def test_levels_on_a_single_rail(client):
    op = {"gbw_hz": "10MHz", "rail_headroom_v": 0.2}
    doc = client.post("/v1/designs", json=dict(DESIGN, opamp=op, supply={"v_pos": 5})).get_json()
    h = _headroom(client, doc, input_peak_v=0.3)["headroom"]
    for o in h["opamps"]:
        assert o["dc_v"] == pytest.approx(2.5, abs=1e-3)
        assert (o["low_v"], o["high_v"]) == pytest.approx((0.2, 4.8))
        assert o["limit_v"] == pytest.approx(min(4.8 - o["dc_v"], o["dc_v"] - 0.2), rel=1e-12)
    buffer = next(o for o in h["opamps"] if o["stage"] is None)
    assert buffer["node"] == "vmid" and buffer["peak_gain"] < 1e-6
    assert h["first_clip"]["stage"] == 1


def test_no_range_known_is_a_note(client):
    doc = client.post("/v1/designs", json=dict(DESIGN, opamp={"gbw_hz": "10MHz"})).get_json()
    h = _headroom(client, doc, input_peak_v=1.0)["headroom"]
    assert h["first_clip"] is None and h["max_output_v"] is None and h["warnings"] == []
    assert h["notes"] and "output_swing_v" in h["notes"][0]
    assert all(o["limit_v"] is None for o in h["opamps"])


def test_stages_clipping_with_the_output_draw_no_warning(client):
    # a Butterworth lowpass: every stage has gain 1 at DC, so all reach their range at the same input to within
    # their offsets; none clips meaningfully before the output
    doc = client.post("/v1/designs", json={"response": "lowpass", "family": "butterworth", "order": 4,
                                           "cutoff_hz": "1kHz", "opamp": {"gbw_hz": "10MHz", "rail_headroom_v": 0.1,
                                                                          "vos_v": "0.5m"},
                                           "supply": {"v_pos": "3.3V"}}).get_json()
    h = _headroom(client, doc, input_peak_v=1.2)["headroom"]
    clip = {o["ref"]: o["clip_input_v"] for o in h["opamps"] if o["stage"] is not None}
    assert max(clip.values()) / min(clip.values()) < 10 ** (0.1 / 20)
    assert not [w for w in h["warnings"] if w["code"] == "clips_before_output"]
    assert not [w for w in doc["warnings"] if w["code"] == "clips_before_output"]


def test_peaks_do_not_depend_on_the_response_grid(client):
    # the default grid of a bandpass spans twenty decades around its zeros at the origin; the levels' peaks are
    # searched on the sections' own grid, so they agree with the design's stage peak gains whatever the grid
    doc = client.post("/v1/designs", json={"response": "bandpass", "family": "butterworth", "order": 2,
                                           "cutoff_hz": ["35kHz", "45kHz"],
                                           "opamp": {"gbw_hz": "50MHz", "output_swing_v": 10}}).get_json()
    for grid in (None, {"start_hz": 1, "stop_hz": 1e7, "points": 101}):
        body = {"design": doc, "headroom": {"input_peak_v": 0.5}}
        if grid:
            body["frequencies"] = grid
        h = client.post("/v1/responses", json=body).get_json()["headroom"]
        assert h["output_peak_gain"] == pytest.approx(10 ** (doc["output_peak_gain_db"] / 20), rel=1e-4)
        for o, st in zip(h["opamps"], doc["stages"]):
            assert o["peak_gain"] == pytest.approx(10 ** (st["peak_gain_db"] / 20), rel=1e-4)
