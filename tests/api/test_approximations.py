"""/v1/approximations and /v1/approximations/compare through the test client."""

from __future__ import annotations

import csv
import io

import numpy as np
import pytest
import scipy.signal as sig

from tests.conftest import problem

URL = "/v1/approximations"


def _response(body, f_hz):
    z = np.array([complex(*p) for p in body["zeros"]])
    p = np.array([complex(*q) for q in body["poles"]])
    _, h = sig.freqs_zpk(z, p, body["gain"], worN=2 * np.pi * np.asarray(f_hz))
    return h


def test_by_requirement_meets_it(client):
    req = {"response": "lowpass", "family": "elliptic", "passband_hz": "2kHz", "stopband_hz": "12kHz",
           "passband_ripple_db": 0.1, "stopband_attenuation_db": 80}
    body = client.post(URL, json=req).get_json()
    # source: scipy.signal.ellipord (reference library) gives the minimum elliptic order
    n, _ = sig.ellipord(2 * np.pi * 2e3, 2 * np.pi * 12e3, 0.1, 80, analog=True)
    assert body["order"] == n and body["degree"] == n
    loss_pass = -20 * np.log10(np.abs(_response(body, np.linspace(1, 2e3, 2000))))
    loss_stop = -20 * np.log10(np.abs(_response(body, np.geomspace(12e3, 1e6, 2000))))
    assert loss_pass.max() <= 0.1 + 1e-9 and loss_stop.min() >= 80 - 1e-9
    assert {e["band"] for e in body["edges"]} == {"passband", "stopband"}
    assert all(e["margin_db"] >= -1e-9 for e in body["edges"])


def test_by_order_matches_scipy_butterworth(client):
    body = client.post(URL, json={"response": "lowpass", "family": "butterworth", "order": 4,
                                  "cutoff_hz": "1kHz"}).get_json()
    # source: scipy.signal.butter (reference library)
    z, p, k = sig.butter(4, 2 * np.pi * 1e3, analog=True, output="zpk")
    mine = np.sort_complex(np.array([complex(*q) for q in body["poles"]]))
    assert np.allclose(mine, np.sort_complex(p), rtol=1e-12)
    assert body["gain"] == pytest.approx(k, rel=1e-12)
    qs = sorted(s["q"] for s in body["sections"])
    assert qs == pytest.approx([0.5411961, 1.3065630], rel=1e-6)  # source: scipy.signal (reference library)


def test_get_form_and_csv(client):
    r = client.get(URL + "?response=bandpass&family=butterworth&order=2&cutoff_hz=35k,45k&format=csv")
    rows = list(csv.DictReader(io.StringIO(r.get_data(as_text=True))))
    assert r.mimetype == "text/csv" and len(rows) == 2 and {row["kind"] for row in rows} == {"bandpass"}
    j = client.get(URL + "?response=lowpass&family=bessel&order=3&cutoff_hz=1k").get_json()
    assert j["order"] == 3 and len(j["sections"]) == 2


@pytest.mark.parametrize("body, field", [
    ({"response": "lowpass", "family": "linkwitz_riley", "order": 3, "cutoff_hz": 1000}, "order"),
    ({"response": "lowpass", "family": "butterworth", "passband_hz": 1000, "stopband_hz": 500,
      "passband_ripple_db": 1, "stopband_attenuation_db": 40}, "stopband_hz"),
    ({"response": "lowpass", "family": "butterworth", "order": 0, "cutoff_hz": 1000}, "order"),
    ({"response": "lowpass", "family": "butterworth", "order": 2.5, "cutoff_hz": 1000}, "order"),
    ({"response": "bandpass", "family": "butterworth", "order": 2, "cutoff_hz": 1000}, "cutoff_hz"),
    ({"response": "lowpass", "family": "butterworth", "order": 2, "cutoff_hz": [1, 2]}, "cutoff_hz"),
    ({"response": "lowpass", "family": "butterworth", "order": 2}, "cutoff_hz"),
    ({"response": "lowpass", "family": "sinc", "order": 2, "cutoff_hz": 1}, "family"),
    ({"response": "lowpass", "family": "butterworth", "order": 2, "cutoff_hz": -5}, "cutoff_hz"),
    ({"response": "lowpass", "family": "butterworth", "order": 2, "cutoff_hz": "1e13"}, "cutoff_hz"),
    ({"response": "lowpass", "family": "butterworth", "passband_hz": 1000}, "stopband_hz"),
])
def test_bad_requests_name_the_field(client, body, field):
    assert field in problem(client.post(URL, json=body), 422)["errors"]


def test_order_above_the_configured_limit_names_the_setting():
    from service import create_app

    c = create_app({"max_order": 6}).test_client()
    body = problem(c.post(URL, json={"response": "lowpass", "family": "butterworth", "order": 8,
                                     "cutoff_hz": 1000}), 422)
    assert body["setting"] == "ROLLOFF_MAX_ORDER" and body["limit_value"] == 6


def test_compare_lists_every_family(client):
    req = {"response": "lowpass", "passband_hz": "10kHz", "stopband_hz": "25.6kHz", "passband_ripple_db": 0.1,
           "stopband_attenuation_db": 80}
    body = client.post(URL + "/compare", json=req).get_json()
    fams = {f["family"]: f for f in body["families"]}
    assert set(fams) == {"butterworth", "chebyshev1", "chebyshev2", "elliptic", "bessel", "legendre",
                         "linkwitz_riley"}
    # source: scipy.signal buttord/ellipord (reference library): the elliptic order is the lowest
    assert fams["elliptic"]["order"] == sig.ellipord(1e4, 2.56e4, 0.1, 80, analog=True)[0]
    assert fams["butterworth"]["order"] == sig.buttord(1e4, 2.56e4, 0.1, 80, analog=True)[0]
    assert body["recommended"] == "elliptic"
    r = client.post(URL + "/compare", json=dict(req, format="csv"))
    assert r.mimetype == "text/csv" and len(r.get_data(as_text=True).strip().splitlines()) == 8
