"""Noise over HTTP: the design reply's summary, the `noise` section of /v1/responses, against ngspice and kT/C.

The ngspice checks run the netlists the service returns (the design's, with its `.noise` line, and the noise
section's own); they fail (never skip) when ngspice is missing.
"""

from __future__ import annotations

import copy
import math
import os
import re
import subprocess
import tempfile

import numpy as np
import pytest

from service.circuit.noise import BOLTZMANN_J_PER_K
from tests.conftest import problem
from tests.ngspice import NGSPICE, run_ngspice_noise

T_K = 300.15
KT = BOLTZMANN_J_PER_K * T_K
#: Agreement asked of every noise figure against ngspice (dB).
AGREEMENT_DB = 0.1

# PM-7 bearing-noise channel sketch: an 8th-order Butterworth lowpass at 1 kHz on a general-purpose op-amp
# with noise figures (invented demo numbers).
OPAMP = {"gbw_hz": "10MHz", "en_nv_rthz": 12, "in_pa_rthz": 0.8, "en_corner_hz": 20, "in_corner_hz": 100,
         "part_id": "PM7-U-OPA-GP"}
DESIGN = {"response": "lowpass", "family": "butterworth", "order": 8, "cutoff_hz": "1kHz", "opamp": OPAMP}


def _db(a: float, b: float) -> float:
    return 20 * math.log10(a / b)


@pytest.fixture(scope="module")
def noisy_design():
    from service import create_app

    c = create_app({"TESTING": True}).test_client()
    r = c.post("/v1/designs", json=DESIGN)
    assert r.status_code == 200, r.get_data(as_text=True)
    return r.get_json()


def _batch(netlist: str) -> tuple[str, list[str]]:
    """ngspice's output for ``netlist`` run as it is in batch mode (``-b -r``), and the plots it wrote."""
    with tempfile.TemporaryDirectory(prefix="ngspice-") as tmp:
        path, raw = os.path.join(tmp, "design.cir"), os.path.join(tmp, "design.raw")
        with open(path, "w") as fh:
            fh.write(netlist)
        proc = subprocess.run([NGSPICE, "-b", "-r", raw, path], cwd=tmp, capture_output=True, text=True,
                              timeout=120)
        assert proc.returncode == 0, proc.stdout[-2000:] + proc.stderr[-2000:]
        with open(raw, "rb") as fh:
            plots = re.findall(rb"^Plotname: (.*)$", fh.read(), re.MULTILINE)
    return proc.stdout + proc.stderr, [p.decode().strip() for p in plots]


def test_design_netlist_carries_the_noise_analysis(noisy_design):
    d = noisy_design
    net = d["netlist"]
    # it runs unchanged in batch mode, its analyses included
    out, plots = _batch(net)
    assert not re.search(r"^\s*error", out, re.IGNORECASE | re.MULTILINE), out[-2000:]
    assert plots == ["AC Analysis", "Noise Spectral Density Curves", "Integrated Noise"]
    # the analysis named in a comment (output and input) and the op-amps' noise generators in their subcircuits
    assert "* noise analysis: output v(out), input source VIN" in net
    assert d["noise"]["analysis"] in net and d["noise"]["analysis"].startswith(".noise v(out) VIN dec 200 ")
    assert "* input sources: en 12n V/rtHz (1/f corner 20 Hz), in 800f A/rtHz (1/f corner 100 Hz)" in net
    assert ".temp 27" in net
    # source: ngspice noise analysis (reference simulator): onoise_total over the netlist's own sweep
    ref = run_ngspice_noise(net)
    n = d["noise"]
    assert [ref["frequency_hz"][0], ref["frequency_hz"][-1]] == pytest.approx(n["band_hz"], rel=1e-9)
    assert abs(_db(n["output_rms_v"], ref["onoise_total"])) < AGREEMENT_DB
    assert abs(_db(n["input_rms_v"] * n["reference_gain"], ref["onoise_total"])) < AGREEMENT_DB
    # ranked contributions that add up, stages numbered from 1
    assert [p["rms_v"] for p in n["parts"]] == sorted((p["rms_v"] for p in n["parts"]), reverse=True)
    assert sum(p["rms_v"] ** 2 for p in n["parts"]) == pytest.approx(n["output_rms_v"] ** 2, rel=1e-9)
    assert sorted(s["stage"] for s in n["stages"]) == [1, 2, 3, 4]
    assert {p["name"] for p in n["parts"] if p["kind"] == "opamp"} == {"U1", "U2", "U3", "U4"}


def test_design_without_noise_figures_has_no_noise_analysis(client):
    d = client.post("/v1/designs", json=dict(DESIGN, opamp={"gbw_hz": "10MHz"})).get_json()
    assert d["noise"] is None and d["supply"] is None
    assert ".noise" not in d["netlist"] and ".op" not in d["netlist"]


def test_response_noise_matches_ngspice_on_its_netlist(client, noisy_design):
    body = {"design": noisy_design, "frequencies": {"start_hz": 10, "stop_hz": "100kHz", "points": 201},
            "noise": {"band_hz": ["20Hz", "20kHz"], "full_scale_v": 2.5}}
    r = client.post("/v1/responses", json=body)
    assert r.status_code == 200, r.get_data(as_text=True)
    n = r.get_json()["noise"]
    assert n["band_hz"] == [20.0, 20000.0] and len(n["output_density_v_rthz"]) == 201
    # source: ngspice noise analysis (reference simulator), the section's own netlist (.noise over the band)
    ref = run_ngspice_noise(n["netlist"])
    assert abs(_db(n["output_rms_v"], ref["onoise_total"])) < AGREEMENT_DB
    # the densities on ngspice's own frequencies
    again = client.post("/v1/responses", json=dict(body, frequencies=ref["frequency_hz"].tolist())).get_json()["noise"]
    got = np.array(again["output_density_v_rthz"])
    assert np.max(np.abs(20 * np.log10(got / ref["onoise"]))) < 0.01
    # input-referred: where the gain is within 80 dB of the passband (deeper in the stopband the simulator's
    # own gain is at the end of its double-precision solve)
    got_in = np.array(again["input_density_v_rthz"])
    passing = ref["onoise"] / ref["inoise"] > 1e-4
    assert passing.sum() > 100
    assert np.max(np.abs(20 * np.log10(got_in[passing] / ref["inoise"][passing]))) < 0.01
    # common practice (no source): SNR of a full-scale sine = 20 log10(Vpeak / sqrt(2) / noise RMS)
    assert n["snr_db"] == pytest.approx(20 * math.log10(2.5 / math.sqrt(2) / n["output_rms_v"]), rel=1e-12)
    assert n["full_scale_v"] == 2.5
    # the same SNR from an input level giving the same output
    by_input = client.post("/v1/responses", json=dict(body, noise={
        "band_hz": [20, 20000], "input_peak_v": 2.5 / n["reference_gain"]})).get_json()["noise"]
    assert by_input["snr_db"] == pytest.approx(n["snr_db"], abs=1e-9)


def _rc_document(client, r_ohm: float) -> dict:
    """A first-order RC lowpass (ideal, noiseless buffer) with R1 = r_ohm, its section moved to match."""
    d = client.post("/v1/designs", json={"response": "lowpass", "family": "butterworth", "order": 1,
                                         "cutoff_hz": "1kHz", "topology": "rc_first_order"}).get_json()
    doc = copy.deepcopy(d)
    parts = {c["kind"]: c for c in doc["stages"][0]["components"]}
    parts["resistor"]["value"] = r_ohm
    doc["stages"][0]["section"]["f0_hz"] = 1 / (2 * math.pi * r_ohm * parts["capacitor"]["value"])
    return doc


@pytest.mark.parametrize("r_ohm", [1e3, 10e3, 100e3])
def test_kt_over_c_through_the_api(client, r_ohm):
    doc = _rc_document(client, r_ohm)
    c_farad = next(c["value"] for c in doc["stages"][0]["components"] if c["kind"] == "capacitor")
    f0 = doc["stages"][0]["section"]["f0_hz"]
    body = {"design": doc, "frequencies": {"start_hz": f0 * 1e-4, "stop_hz": f0 * 1e4, "points": 401},
            "noise": {}}
    n = client.post("/v1/responses", json=body).get_json()["noise"]
    # source: J. B. Johnson, Phys. Rev. 32, 97 (1928) and H. Nyquist, Phys. Rev. 32, 110 (1928): 4kTR, through the
    # RC lowpass: int_0^inf 4kTR / (1 + (f/f0)^2) df = kT/C, independent of R (the kT/C derivation of
    # B. Razavi, Design of Analog CMOS Integrated Circuits, 2001, sec. 7.2, from memory); the band
    # [f0/1e4, 1e4 f0] leaves out (2/pi) 1e-4 of the power at each end
    tails = 1 - 2 * (2 / math.pi) * 1e-4
    assert n["output_rms_v"] == pytest.approx(math.sqrt(KT / c_farad * tails), rel=1e-5)
    assert [p["name"] for p in n["parts"]] == [next(c["ref"] for c in doc["stages"][0]["components"]
                                                    if c["kind"] == "resistor")]
    assert n["notes"] and "thermal" in n["notes"][0]


def test_default_opamp_noise_and_temperature(client):
    doc = client.post("/v1/designs", json=dict(DESIGN, order=4, opamp={"gbw_hz": "10MHz"})).get_json()
    grid = {"start_hz": 10, "stop_hz": 100e3, "points": 101}
    plain = client.post("/v1/responses", json={"design": doc, "frequencies": grid, "noise": {}}).get_json()["noise"]
    cold = client.post("/v1/responses", json={"design": doc, "frequencies": grid,
                                              "noise": {"temperature_k": 300.15 / 4}}).get_json()["noise"]
    # source: Johnson (1928): thermal noise power proportional to T -- a quarter of T halves the RMS
    assert cold["output_rms_v"] == pytest.approx(plain["output_rms_v"] / 2, rel=1e-9)
    noisy = client.post("/v1/responses", json={"design": doc, "frequencies": grid,
                                               "noise": {"opamp": {"en_nv_rthz": 20}}}).get_json()["noise"]
    assert noisy["output_rms_v"] > plain["output_rms_v"]
    assert any(s["name"] == "U1.en" for s in noisy["sources"]) and not noisy["notes"]


def test_dynamic_range_uses_the_op_amp_swing(client):
    op = dict(OPAMP, output_swing_v=2.0)
    doc = client.post("/v1/designs", json=dict(DESIGN, order=4, opamp=op)).get_json()
    body = {"design": doc, "frequencies": {"start_hz": 10, "stop_hz": 100e3, "points": 101},
            "noise": {"band_hz": [20, 20e3]}, "headroom": {"input_peak_v": 0.5}}
    out = client.post("/v1/responses", json=body).get_json()
    n, h = out["noise"], out["headroom"]
    assert n["max_output_v"] == pytest.approx(h["max_output_v"], rel=1e-12)
    # common practice (no source): dynamic range = largest undistorted sine RMS over the noise RMS
    assert n["dynamic_range_db"] == pytest.approx(20 * math.log10(h["max_output_v"] / math.sqrt(2) / n["output_rms_v"]))
    # the design reply states the same over its own band
    assert doc["noise"]["max_output_v"] == pytest.approx(h["max_output_v"], rel=1e-6)


@pytest.mark.parametrize(("family", "extra"), [("butterworth", {"order": 8}),
                                               ("chebyshev1", {"order": 6, "passband_ripple_db": 1.0})])
def test_max_dynamic_range_order_has_the_largest_measured_dynamic_range(client, family, extra):
    op = {"gbw_hz": "10MHz", "en_nv_rthz": 8, "in_pa_rthz": 0.5, "output_swing_v": 2.0}
    got = {}
    for order in ("ascending_q", "descending_q", "max_dynamic_range"):
        req = dict({"response": "lowpass", "family": family, "cutoff_hz": "1kHz", "section_order": order,
                    "opamp": op}, **extra)
        got[order] = client.post("/v1/designs", json=req).get_json()["noise"]["dynamic_range_db"]
    # source: R. Schaumann and M. E. Van Valkenburg, Design of Analog Filters, 2001, ch. 6 (from memory): the
    # cascade order is chosen for the largest ratio of undistorted output to output noise; here both are
    # measured on the realized circuit (noise and headroom analyses) rather than estimated
    assert got["max_dynamic_range"] >= max(got["ascending_q"], got["descending_q"])


@pytest.mark.parametrize(("body", "field"), [
    ({"filter": {"response": "lowpass", "family": "butterworth", "order": 2, "cutoff_hz": 1000}, "noise": {}},
     "noise"),
    ({"sections": [{"kind": "lowpass", "order": 2, "f0_hz": 1000, "q": 0.7, "gain": 1}], "noise": {}}, "noise"),
    ({"poles": [[-1000, 0]], "gain": 1000, "headroom": {"input_peak_v": 1}}, "headroom"),
])
def test_a_transfer_function_has_no_circuit(client, body, field):
    p = problem(client.post("/v1/responses", json=body), 422)
    assert list(p["errors"]) == [field] and "design document" in p["detail"]


@pytest.mark.parametrize(("noise", "field"), [
    ({"band_hz": [1, 1000]}, "noise.band_hz"),                 # below the grid
    ({"band_hz": [100, "1MHz"]}, "noise.band_hz"),             # above the grid
    ({"band_hz": [1000, 100]}, "noise.band_hz"),               # reversed
    ({"band_hz": [100]}, "noise.band_hz"),
    ({"band_hz": [0, 100]}, "noise.band_hz[0]"),
    ({"temperature_k": 0}, "noise.temperature_k"),
    ({"temperature_k": 5000}, "noise.temperature_k"),
    ({"full_scale_v": -1}, "noise.full_scale_v"),
    ({"full_scale_v": 1, "input_peak_v": 1}, "noise.input_peak_v"),
    ({"points_per_decade": 5}, "noise.points_per_decade"),
    ({"points_per_decade": 20.5}, "noise.points_per_decade"),
    ({"opamp": {"en_nv_rthz": -3}}, "noise.opamp.en_nv_rthz"),
    ({"opamp": {"en_nv_rthz": 1e5}}, "noise.opamp.en_nv_rthz"),
    ({"opamp": {"in_pa_rthz": -1}}, "noise.opamp.in_pa_rthz"),
    ({"opamp": {"en_corner_hz": "1GHz"}}, "noise.opamp.en_corner_hz"),
    ({"opamp": {"vos_v": 1e-3}}, "noise.opamp.vos_v"),
    ({"bandwidth": 3}, "noise.bandwidth"),
])
def test_bad_noise_requests_name_the_field(client, noisy_design, noise, field):
    body = {"design": noisy_design, "frequencies": {"start_hz": 10, "stop_hz": 100e3, "points": 51}, "noise": noise}
    p = problem(client.post("/v1/responses", json=body), 422)
    assert field in p["errors"], p


@pytest.mark.parametrize(("figure", "value"), [("en_nv_rthz", -1.0), ("en_nv_rthz", 5e3), ("in_pa_rthz", 1e7),
                                               ("en_corner_hz", -10.0), ("vos_v", 0.5), ("ib_a", 0.1),
                                               ("rail_headroom_v", 50.0)])
def test_negative_or_absurd_op_amp_figures(client, noisy_design, figure, value):
    p = problem(client.post("/v1/designs", json=dict(DESIGN, opamp=dict(OPAMP, **{figure: value}))), 422)
    assert f"opamp.{figure}" in p["errors"]
    doc = copy.deepcopy(noisy_design)
    doc["stages"][1]["opamps"][0][figure] = value
    p = problem(client.post("/v1/designs/evaluate", json=doc), 422)
    assert f"stages[1].opamps[0].{figure}" in p["errors"]
    p = problem(client.post("/v1/responses", json={"design": doc, "noise": {}}), 422)
    assert f"design.stages[1].opamps[0].{figure}" in p["errors"]


def test_noise_work_is_bounded_before_it_starts(client):
    from service import create_app

    doc = client.post("/v1/designs", json=dict(DESIGN, order=2)).get_json()
    c = create_app({"TESTING": True, "max_work": 1_500_000}).test_client()
    ok = {"design": doc, "frequencies": {"start_hz": 1, "stop_hz": 1e6, "points": 51}, "noise": {}}
    assert c.post("/v1/responses", json=ok).status_code == 200
    heavy = dict(ok, frequencies={"start_hz": 1e-3, "stop_hz": 1e10, "points": 2001},
                 noise={"points_per_decade": 2000})
    p = problem(c.post("/v1/responses", json=heavy), 422)
    assert p["limit"] == "max_work" and "noise.points_per_decade" in p["errors"]
