"""/v1/approximations/compare: what each family costs to build, a quick yield with parts, and a weighed
recommendation."""

from __future__ import annotations

import pytest

from service import create_app

URL = "/v1/approximations/compare"
REQ = {"response": "lowpass", "passband_hz": "1kHz", "stopband_hz": "3kHz", "passband_ripple_db": 0.5,
       "stopband_attenuation_db": 40}
PARTS = {"resistors": {"series": "E96", "tolerance": 0.01}, "capacitors": {"series": "E12", "tolerance": 0.02}}


@pytest.fixture(scope="module")
def client():
    return create_app({"TESTING": True, "request_deadline_s": 120.0}).test_client()


def test_opamps_and_gbw_without_parts(client):
    body = client.post(URL, json=REQ).get_json()
    meeting = [f for f in body["families"] if f["meets"] and f["opamps"] is not None]
    assert len(meeting) >= 4
    for f in meeting:
        fam = dict(REQ, family=f["family"])
        sections = client.post("/v1/approximations", json=fam).get_json()["sections"]
        # source: R. Mancini, Op Amps for Everyone, TI 2002, ch. 16 (from memory): GBW >= |G| Q f0 / error,
        # error 1 %, a first-order section as Q = 1, gain at least 1
        rule = max(max(abs(s["gain"]), 1) * max(s["q"] or 1, 1) * s["f0_hz"] / 0.01 for s in sections)
        assert f["gbw_needed_hz"] == pytest.approx(rule, rel=1e-5)  # the reply rounds to 6 significant digits
        # the automatic topologies use one op-amp per section at least and four at most
        assert len(sections) <= f["opamps"] <= 4 * len(sections)
        assert f["predicted_yield"] is None and f["design_meets"] is None
    # the same count as /v1/designs gives that family at that order with topology auto and the default parts
    for f in meeting:
        by_order = {"response": "lowpass", "family": f["family"], "order": f["order"], "cutoff_hz": "1kHz",
                    "passband_ripple_db": 0.5, "stopband_attenuation_db": 40}
        doc = client.post("/v1/designs", json=by_order).get_json()
        assert sum(len(s["opamps"]) for s in doc["stages"]) == f["opamps"], f["family"]
    rec = next(f for f in body["families"] if f["family"] == body["recommended"])
    assert all(rec["opamps"] <= f["opamps"] for f in meeting if f["within_limits"])
    assert f"{rec['opamps']} op-amp" in body["recommended_reason"]


def test_quick_yield_with_parts_agrees_with_a_verified_run(client):
    body = client.post(URL, json=dict(REQ, parts=PARTS, opamp={"gbw_hz": "10MHz"},
                                      **{"yield": {"trials": 1000, "seed": 5}})).get_json()
    built = [f for f in body["families"] if f["predicted_yield"] is not None]
    assert built and all(f["design_meets"] is not None for f in built)
    rec = next(f for f in built if f["family"] == body["recommended"])
    assert "boards pass" in body["recommended_reason"]
    # no family's yield is distinguishably above the recommended one's
    assert all(f["predicted_yield"]["ci95_low"] <= rec["predicted_yield"]["ci95_high"] for f in built)
    # source: /v1/tolerance (every board verified) on the design /v1/designs makes of that family with those
    # parts: when its first step is the design compared (it meets at once), the estimate and the verified yield
    # agree within their Wilson intervals (E. B. Wilson, JASA 22 (1927) 209-212)
    doc = client.post("/v1/designs", json=dict(REQ, family=rec["family"], parts=PARTS,
                                              opamp={"gbw_hz": "10MHz"})).get_json()
    if len(doc["steps"]) == 1 and doc["order"] == rec["order"]:
        y = client.post("/v1/tolerance", json={"design": doc, "trials": 1000, "seed": 77}).get_json()["yield"]
        q = rec["predicted_yield"]
        assert y["ci95_low"] <= q["ci95_high"] and q["ci95_low"] <= y["ci95_high"]
    r = client.post(URL, json=dict(REQ, parts=PARTS, format="csv"))
    assert r.mimetype == "text/csv" and "predicted_yield" in r.get_data(as_text=True).splitlines()[0]


def test_comparing_with_parts_is_bounded_by_the_work_limit():
    c = create_app({"TESTING": True, "max_work": 2_000_000}).test_client()
    r = c.post(URL, json=dict(REQ, parts=PARTS))
    assert r.status_code == 422 and "parts" in r.get_json()["errors"]
    assert c.post(URL, json=REQ).status_code == 200
